// examples/tool/model.cpp: whole models.
//   kindling assemble PLAN -o model.safetensors|model.npz   every parameter of a model plan
//       (kindling/io/manifest.hpp) into one file, streamed, plus a manifest of what each
//       parameter received; .npz members are stored, or deflated with --compress. PLAN
//       may also be a manifest: the checkpoint it describes is written again.
//   kindling verify FILE --manifest M   recomputes the digest of each tensor in FILE and
//       compares it with the manifest's, exit 1 naming every tensor that differs (or is
//       missing, or extra).
//   kindling audit FILE --plan P | --manifest M   the library's statistical and structural
//       audits on every tensor against what the plan says it was drawn from: a table (or
//       --json), exit 1 naming every tensor that fails. The false-alarm rate --alpha is
//       for the whole file: each of the N statistical reports runs at alpha / N
//       (Bonferroni), unless --uncorrected.
#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <memory>
#include <mutex>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include <sys/mman.h>

#include <kindling/audit/conformance.hpp>
#include <kindling/audit/structure.hpp>
#include <kindling/audit/symmetry.hpp>
#include <kindling/io/manifest.hpp>
#ifdef KINDLING_TOOL_NPZ
#include <kindling/io/npz.hpp>
#endif

#include "checkpoint.hpp"
#include "output.hpp"
#include "schemes.hpp"
#include "tool.hpp"

namespace kindling::tool {

namespace {

using json = nlohmann::json;

bool ends_with(const std::string& s, const std::string& tail) {
  return s.size() >= tail.size() && s.compare(s.size() - tail.size(), tail.size(), tail) == 0;
}

std::string parameter_label(const model_plan& plan, std::size_t i) {
  return "tensor " + std::to_string(i + 1) + " of " + std::to_string(plan.parameters.size()) + " (" +
         plan.parameters[i].name + ")";
}

// PLAN is a model plan, or a manifest that assemble wrote (its "format" says which): a
// manifest regenerates the checkpoint it describes, bit for bit, from its records alone.
model_plan read_assemble_input(const std::string& path, std::uint64_t* seed) {
  const std::string source = "PLAN '" + path + "'";
  const json doc = parse_json_once(read_file_bounded(path, plan_max_bytes, "PLAN", "64 MiB"), source);
  if (doc.is_object() && doc.value("format", json()) == "kindling-manifest") return plan_from_manifest(doc, source, seed);
  if (doc.is_object() && doc.contains("format") && doc["format"] != "kindling-model-plan") {
    detail::plan_fail(source, "format", doc["format"], "\"kindling-model-plan\" or \"kindling-manifest\"");
  }
  return plan_from_json(doc, source, seed);
}

}  // namespace

int run_assemble(const assemble_options& o) {
  if (o.plan.empty()) throw std::invalid_argument("PLAN is missing: expected a model plan .json file");
  if (o.output.empty()) throw std::invalid_argument("-o is missing: expected the output .safetensors or .npz file");
  if (o.threads == 0) throw std::invalid_argument("--threads 0: expected at least 1 thread");
  const bool npz = ends_with(o.output, ".npz");
  if (o.compress && !npz) {
    throw std::invalid_argument("--compress applies to .npz output only, and -o '" + o.output +
                                "' does not end in .npz (safetensors files are not compressed)");
  }
  const std::string manifest_path = o.manifest.empty() ? o.output + ".manifest.json" : o.manifest;
  std::uint64_t seed = 0;
  const model_plan plan = read_assemble_input(o.plan, &seed);
  if (o.seed) seed = *o.seed;
  check_plan(plan);
  check_output("-o", o.output, {{"PLAN", o.plan}});
  check_output("--manifest", manifest_path, {{"PLAN", o.plan}, {"-o", o.output}});
  progress_line progress("assemble");
  model_write_options options;
  options.threads = o.threads;
  if (progress.active()) {
    options.progress = [&](std::uint64_t done, std::uint64_t total, std::size_t i) {
      progress.show(bytes_text(static_cast<double>(done)) + " of " + bytes_text(static_cast<double>(total)) + " (" +
                    number_text(total ? 100.0 * static_cast<double>(done) / static_cast<double>(total) : 100.0, 3) +
                    "%), " + parameter_label(plan, i));
    };
  }
  json manifest;
  if (npz) {
#ifdef KINDLING_TOOL_NPZ
    npz_options zip;
    zip.compress = o.compress;
    manifest = write_model(
        plan, seed, [&](const std::vector<safetensors_source>& tensors) { write_npz(o.output, tensors, zip, "-o"); },
        options);
#else
    throw std::invalid_argument("-o '" + o.output + "' ends in .npz, and this kindling was built without zlib, so "
                                "without .npz support; expected a .safetensors output");
#endif
  } else {
    manifest = write_model_safetensors(plan, seed, o.output, "-o", options);
  }
  progress.clear();
  write_output("--manifest", manifest_path, manifest.dump(2) + "\n");
  std::uint64_t bytes = 0;
  for (const json& r : manifest["parameters"]) bytes += r["bytes"].get<std::uint64_t>();
  std::printf("wrote %s: %zu parameters, %llu bytes of values, seed %llu; manifest %s\n", o.output.c_str(),
              plan.parameters.size(), static_cast<unsigned long long>(bytes), static_cast<unsigned long long>(seed),
              manifest_path.c_str());
  return exit_ok;
}

int run_verify(const verify_options& o) {
  if (o.file.empty()) throw std::invalid_argument("FILE is missing: expected the .safetensors or .npz checkpoint");
  if (o.manifest.empty()) throw std::invalid_argument("--manifest is missing: expected the manifest .json file");
  const json manifest = read_manifest(o.manifest, "--manifest");
  std::uint64_t seed = 0;
  // Validates the manifest whole (format versions, every record) before the file is read.
  const model_plan plan = plan_from_manifest(manifest, "--manifest '" + o.manifest + "'", &seed);
  const checkpoint file(o.file, "FILE");
  const json& records = manifest["parameters"];
  std::vector<std::string> failed;
  for (std::size_t i = 0; i < plan.parameters.size(); ++i) {
    const model_parameter& p = plan.parameters[i];
    const std::string want = records[i].value("digest", std::string());
    const checkpoint::tensor* t = file.find(p.name);
    std::string verdict;
    if (t == nullptr) {
      verdict = "missing from the file";
    } else if (t->shape != p.full_shape() || t->dtype != p.element) {
      verdict = std::string("shape ") + shape_text(t->shape) + " " + element_kind_name(t->dtype) + ", expected " +
                shape_text(p.full_shape()) + " " + element_kind_name(p.element);
    } else {
      parameter_digest d;
      file.read(*t, [&](const char* data, std::size_t n) { d.update(data, n); });
      const std::string got = d.hex();
      if (got != want) verdict = "digest " + got + " differs from the manifest's " + want;
    }
    std::printf("%-8s %s %s %s%s%s\n", verdict.empty() ? "ok" : "FAILED", p.name.c_str(), shape_text(p.full_shape()).c_str(),
                element_kind_name(p.element), verdict.empty() ? "" : ": ", verdict.c_str());
    if (!verdict.empty()) failed.push_back(p.name);
  }
  for (const checkpoint::tensor& t : file.tensors()) {
    if (plan.find(t.name) == nullptr) {
      std::printf("FAILED   %s: in the file but not in the manifest\n", t.name.c_str());
      failed.push_back(t.name);
    }
  }
  if (failed.empty()) {
    std::printf("verified %s: all %zu tensors match the manifest exactly\n", o.file.c_str(), plan.parameters.size());
    return exit_ok;
  }
  std::string list;
  for (const std::string& n : failed) list += (list.empty() ? "" : ", ") + n;
  std::printf("FAILED %s: %zu of %zu tensors differ from the manifest: %s\n", o.file.c_str(), failed.size(),
              plan.parameters.size(), list.c_str());
  return exit_check_failed;
}

// ---- audit -----------------------------------------------------------------------------

namespace {

// What the audit of one tensor found.
struct tensor_verdict {
  std::string name, shape, dtype, fans, scheme;
  bool passed = true;
  std::string worst;  // the first failure, or the statistical finding closest to failing
  json reports = json::array();
};

json report_json(const std::string& kind, const audit_report& r) {
  json findings = json::array();
  for (const audit_finding& f : r.findings()) {
    json one = {{"check", f.check}, {"passed", f.passed}, {"sentence", f.sentence}};
    if (!std::isnan(f.p_value)) {
      one["statistic"] = std::isfinite(f.statistic) ? json(f.statistic) : json(nullptr);
      one["p_value"] = std::isfinite(f.p_value) ? json(f.p_value) : json(nullptr);
    }
    findings.push_back(one);
  }
  return {{"report", kind}, {"subject", r.subject()}, {"passed", r.passed()}, {"findings", findings}};
}

// Whether the scheme is audited statistically (its values follow a distribution).
bool statistical_scheme(const scheme_value& s) {
  return std::visit(
      [](const auto& sc) {
        using S = std::decay_t<decltype(sc)>;
        return detail::has_distribution<S>::value && !std::is_same<S, zeros>::value && !std::is_same<S, constant>::value;
      },
      s.variant());
}
// The schemes whose every value scheme_report compares exactly with the plan's. The
// symmetry check can add nothing to that comparison (if every value is the scheme's, so
// are the units: all equal for zeros and constant, all distinct for identity; if not, the
// comparison has already failed), and on an identity's
// one-hot units its pair search takes a time that grows with the square of the units
// (24 s for 8256 x 8256 bf16), so it is not run for them.
bool compared_exactly(const scheme_value& s) {
  return std::holds_alternative<zeros>(s.variant()) || std::holds_alternative<constant>(s.variant()) ||
         std::holds_alternative<identity>(s.variant());
}
bool symmetry_applies(const model_parameter& p) { return p.full_shape().size() >= 2 && !compared_exactly(p.scheme); }

// The reports of the scheme's own audit on the tensor's values, typed E (in the host's
// byte order).
template <class E>
audit_report scheme_report(const model_parameter& p, std::uint64_t seed, const strided_view<const E>& v,
                           std::size_t count, double alpha) {
  const weight_layout layout = std::visit([](const auto& l) { return detail::layout_of(l); }, p.layer);
  const double tolerance = orthogonal_tolerance(p.element);
  const double gain = p.scheme.argument("gain").value_or(1.0);
  return std::visit(
      [&](const auto& sc) -> audit_report {
        using S = std::decay_t<decltype(sc)>;
        if constexpr (std::is_same<S, zeros>::value || std::is_same<S, constant>::value ||
                      std::is_same<S, identity>::value) {
          // Deterministic values: compared with a fresh fill, element by element, 1 MiB
          // at a time (bounded memory). parameter_bytes gives little-endian bytes;
          // to_little_endian puts them in the host's order (a swap undoes itself).
          const auto* got = reinterpret_cast<const unsigned char*>(v.data());
          const std::size_t item = sizeof(E), bytes = count * item;
          parameter_bytes want(p, seed);
          std::vector<char> w(std::min<std::size_t>(bytes, std::size_t{1} << 20));  // whole elements
          std::uint64_t wrong = 0, first = 0;
          for (std::size_t at = 0; at < bytes; at += w.size()) {
            const std::size_t k = std::min(w.size(), bytes - at);
            want.read(at, w.data(), k);
            to_little_endian(reinterpret_cast<unsigned char*>(w.data()), k / item, item);
            for (std::size_t i = 0; i < k; i += item) {
              if (std::memcmp(got + at + i, &w[i], item) != 0) {
                if (wrong == 0) first = (at + i) / item;
                ++wrong;
              }
            }
          }
          audit_report r(p.scheme.text());
          const std::uint64_t n = count;
          r.add({"exact-values", wrong == 0,
                 wrong == 0 ? "every value is the one " + p.scheme.text() + " gives"
                            : std::to_string(wrong) + " of " + std::to_string(n) + " values differ from what " +
                                  p.scheme.text() + " gives (first at flat index " + std::to_string(first) + ")"});
          return r;
        } else if constexpr (std::is_same<S, orthogonal>::value) {
          return std::visit(
              [&](const auto& l) -> audit_report {
                if constexpr (detail::is_packed<std::decay_t<decltype(l)>>::value) return check_orthogonal(v, l, gain, tolerance);
                else return check_orthogonal(v, gain, tolerance, layout);
              },
              p.layer);
        } else if constexpr (std::is_same<S, delta_orthogonal>::value) {
          return check_delta_orthogonal(v, weight_info{p.layer_fans(), layout}, gain, tolerance);
        } else if constexpr (std::is_same<S, sparse>::value) {
          return check_sparsity(v, sc.nonzero, layout);
        } else {
          audit_options options;
          options.alpha = alpha;
          return std::visit([&](const auto& l) { return check_scheme(v, l, sc, options); }, p.layer);
        }
      },
      p.scheme.variant());
}

bool host_is_little_endian() noexcept {
  const std::uint16_t one = 1;
  unsigned char first = 0;
  std::memcpy(&first, &one, 1);
  return first == 1;
}

// One audit thread's tensor memory: grown to the largest tensor the thread has read and
// reused for every later one. A fresh tensor-sized allocation per tensor made the kernel
// map, clear and unmap its pages each time (about a fifth of a whole-model audit's time,
// bench/RESULTS.md); reused, its pages are touched once. Peak: the largest tensor.
// Where the system offers it (Linux), the block asks for transparent huge pages: the
// audit passes over a tensor of many MiB then miss the TLB far less often.
class tensor_buffer {
 public:
  tensor_buffer() = default;
  tensor_buffer(const tensor_buffer&) = delete;
  tensor_buffer& operator=(const tensor_buffer&) = delete;
  ~tensor_buffer() { release(); }

  // Storage for `bytes` bytes, page-aligned (so aligned for any element type); its old
  // contents are not kept.
  unsigned char* take(std::size_t bytes) {
    if (bytes > size_) {
      release();  // the old block goes before the new one comes: one block at a time
      constexpr std::size_t huge = std::size_t{2} << 20;
      const std::size_t length = (bytes + huge - 1) / huge * huge;
      void* p = ::mmap(nullptr, length, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
      if (p == MAP_FAILED) throw std::bad_alloc();
#if defined(MADV_HUGEPAGE)
      ::madvise(p, length, MADV_HUGEPAGE);  // a hint: refused or not, the block is usable
#endif
      data_ = static_cast<unsigned char*>(p);
      size_ = length;
    }
    return data_;
  }

 private:
  void release() noexcept {
    if (data_ != nullptr) ::munmap(data_, size_);
    data_ = nullptr;
    size_ = 0;
  }
  unsigned char* data_ = nullptr;
  std::size_t size_ = 0;
};

template <class E>
void audit_values(const checkpoint& file, const checkpoint::tensor& t, const model_parameter& p, std::uint64_t seed,
                  tensor_buffer& buffer, double alpha, tensor_verdict* out) {
  const std::vector<std::uint64_t> s = p.full_shape();
  const auto count = static_cast<std::size_t>(t.bytes / sizeof(E));
  // A tensor is read once, from the file straight into the thread's reused buffer as
  // elements of type E, then put in the host's byte order in place: no staging copy, no
  // per-tensor allocation. Only a safetensors tensor larger than read_at_most on a
  // little-endian host is audited in place, mapped from the file, so that the buffer
  // (resident, unlike a mapping's page-cache pages) stays small. Reading first is not a
  // cost but a saving on some hosts: reading the page cache through a mapping's 4 KiB
  // pages took a whole-model audit twice as long as the kernel's copy of the same pages
  // and the audit of the copy (1.94 s against 0.97 s on a virtual machine; the mapping
  // was 0.1 s faster on another; bench/RESULTS.md, 2026-12-04).
  constexpr std::uint64_t read_at_most = std::uint64_t{128} << 20;
  std::shared_ptr<const char> mapped;
  if (t.bytes > read_at_most && host_is_little_endian()) mapped = file.map(t);
  const E* values = nullptr;
  if (mapped && reinterpret_cast<std::uintptr_t>(mapped.get()) % alignof(E) == 0) {
    values = reinterpret_cast<const E*>(mapped.get());
  } else {
    E* read = reinterpret_cast<E*>(buffer.take(count * sizeof(E)));
    std::uninitialized_default_construct_n(read, count);  // trivial: begins their lifetime, writes nothing
    file.read_into(t, reinterpret_cast<char*>(read));
    to_little_endian(reinterpret_cast<unsigned char*>(read), count, sizeof(E));
    values = read;
  }
  const strided_view<const E> v(values, shape(s.begin(), s.end()));
  const audit_report r = scheme_report<E>(p, seed, v, count, alpha);
  out->reports.push_back(report_json("scheme", r));
  std::vector<audit_report> all{r};
  if (symmetry_applies(p)) {
    symmetry_options so;
    so.layout = std::visit([](const auto& l) { return detail::layout_of(l); }, p.layer);
    so.alpha = alpha;
    all.push_back(check_symmetry(v, so));
    out->reports.push_back(report_json("symmetry", all.back()));
  }
  // The worst finding: a failed structural check (no p-value), else the failed or passed
  // statistical finding with the smallest p-value.
  const audit_finding* worst = nullptr;
  const auto rank = [](const audit_finding& f) {
    return std::make_pair(f.passed ? 1 : 0, std::isnan(f.p_value) ? (f.passed ? 2.0 : -1.0) : f.p_value);
  };
  for (const audit_report& one : all) {
    for (const audit_finding& f : one.findings()) {
      if (!f.passed) out->passed = false;
      if (worst == nullptr || rank(f) < rank(*worst)) worst = &f;
    }
  }
  if (worst == nullptr || (worst->passed && std::isnan(worst->p_value))) {
    out->worst = "all checks passed";
  } else if (worst->passed) {
    out->worst = "lowest p = " + number_text(worst->p_value, 3) + " (" + worst->check + ")";
  } else {
    out->worst = worst->check + ": " + worst->sentence;
  }
}

tensor_verdict audit_one(const checkpoint& file, const model_parameter& p, std::uint64_t seed, double alpha,
                         tensor_buffer& buffer) {
  tensor_verdict out;
  out.name = p.name;
  out.shape = shape_text(p.full_shape());
  out.dtype = element_kind_name(p.element);
  const fans f = p.layer_fans();
  out.fans = f.fan_in == 0 ? "-" : std::to_string(f.fan_in) + "/" + std::to_string(f.fan_out);
  out.scheme = p.scheme.text();
  const checkpoint::tensor* t = file.find(p.name);
  if (t == nullptr) {
    out.passed = false;
    out.worst = "missing from the file";
    return out;
  }
  if (t->shape != p.full_shape() || t->dtype != p.element) {
    out.passed = false;
    out.worst = "the file holds " + std::string(element_kind_name(t->dtype)) + " " + shape_text(t->shape) +
                ", expected " + out.dtype + " " + out.shape;
    return out;
  }
  if (t->bytes / element_kind_bytes(t->dtype) > max_check_elements) {
    throw std::length_error("tensor '" + p.name + "' has " + std::to_string(t->bytes / element_kind_bytes(t->dtype)) +
                            " elements, expected at most " + std::to_string(max_check_elements) +
                            " (the tool's memory cap for one audited tensor)");
  }
  switch (p.element) {
    case element_kind::f32: audit_values<float>(file, *t, p, seed, buffer, alpha, &out); break;
    case element_kind::f64: audit_values<double>(file, *t, p, seed, buffer, alpha, &out); break;
    case element_kind::f16: audit_values<float16>(file, *t, p, seed, buffer, alpha, &out); break;
    case element_kind::bf16: audit_values<bfloat16>(file, *t, p, seed, buffer, alpha, &out); break;
  }
  return out;
}

}  // namespace

int run_audit(const audit_command_options& o) {
  if (o.file.empty()) throw std::invalid_argument("FILE is missing: expected the .safetensors or .npz checkpoint");
  if (o.plan.empty() == o.manifest.empty()) {
    throw std::invalid_argument(o.plan.empty() ? "neither --plan nor --manifest: expected one of them, saying what each tensor was drawn from"
                                               : "both --plan and --manifest: expected one of them");
  }
  if (!(o.alpha > 0 && o.alpha < 1)) {
    throw std::invalid_argument("--alpha " + number_text(o.alpha, 6) + ": expected a false-alarm rate in (0, 1), e.g. 0.001");
  }
  if (o.threads == 0) throw std::invalid_argument("--threads 0: expected at least 1 thread");
  std::uint64_t seed = 0;
  const model_plan plan = o.plan.empty()
                              ? plan_from_manifest(read_manifest(o.manifest, "--manifest"), "--manifest '" + o.manifest + "'", &seed)
                              : read_plan(o.plan, &seed, "--plan");
  const checkpoint file(o.file, "FILE");

  // Bonferroni: the statistical reports of the whole file share the false-alarm rate.
  std::size_t reports = 0;
  for (const model_parameter& p : plan.parameters) {
    reports += (statistical_scheme(p.scheme) ? 1 : 0) + (symmetry_applies(p) ? 1 : 0);
  }
  const double each = o.uncorrected || reports == 0 ? o.alpha : o.alpha / static_cast<double>(reports);

  std::vector<tensor_verdict> verdicts(plan.parameters.size());
  std::atomic<std::size_t> next{0}, finished{0};
  std::mutex error_mutex;
  std::exception_ptr error;
  progress_line progress("audit");
  std::mutex progress_mutex;
  const auto work = [&]() {
    tensor_buffer buffer;  // this thread's, reused for every tensor it audits
    for (;;) {
      const std::size_t i = next.fetch_add(1);
      if (i >= plan.parameters.size()) return;
      try {
        verdicts[i] = audit_one(file, plan.parameters[i], seed, each, buffer);
      } catch (...) {
        const std::lock_guard<std::mutex> lock(error_mutex);
        if (!error) error = std::current_exception();
        next.store(plan.parameters.size());
        return;
      }
      const std::size_t done = ++finished;
      const std::lock_guard<std::mutex> lock(progress_mutex);
      progress.show(std::to_string(done) + " of " + std::to_string(plan.parameters.size()) + " tensors audited");
    }
  };
  std::vector<std::thread> helpers;
  for (std::size_t t = 1; t < std::min(o.threads, plan.parameters.size()); ++t) helpers.emplace_back(work);
  work();
  for (std::thread& h : helpers) h.join();
  progress.clear();
  if (error) std::rethrow_exception(error);

  std::vector<std::string> failed;
  for (const tensor_verdict& v : verdicts) {
    if (!v.passed) failed.push_back(v.name);
  }
  std::vector<std::string> extra;
  for (const checkpoint::tensor& t : file.tensors()) {
    if (plan.find(t.name) == nullptr) extra.push_back(t.name);
  }
  const std::string correction =
      o.uncorrected ? "uncorrected: each of the " + std::to_string(reports) + " statistical reports at alpha " +
                          number_text(o.alpha, 3) + ", so a correct file fails more often than alpha"
                    : "Bonferroni: alpha " + number_text(o.alpha, 3) + " for the whole file, each of the " +
                          std::to_string(reports) + " statistical reports at " + number_text(each, 3);
  if (o.json) {
    json tensors = json::array();
    for (const tensor_verdict& v : verdicts) {
      tensors.push_back({{"name", v.name}, {"shape", json::parse(v.shape)}, {"dtype", v.dtype}, {"fans", v.fans},
                         {"scheme", v.scheme}, {"passed", v.passed}, {"worst", v.worst}, {"reports", v.reports}});
    }
    const json out = {{"file", o.file},
                      {"format", file.format()},
                      {"alpha", o.alpha},
                      {"statistical_reports", reports},
                      {"alpha_each", each},
                      {"correction", o.uncorrected ? "none" : "bonferroni"},
                      {"tensors", tensors},
                      {"not_in_plan", extra},
                      {"passed", failed.empty() && extra.empty()}};
    std::printf("%s\n", out.dump(2).c_str());
  } else {
    std::size_t wn = 4, ws = 5, wf = 4, wk = 6;
    for (const tensor_verdict& v : verdicts) {
      wn = std::max(wn, v.name.size());
      ws = std::max(ws, v.shape.size() + 1 + v.dtype.size());
      wf = std::max(wf, v.fans.size());
      wk = std::max(wk, v.scheme.size());
    }
    std::printf("%s (%s): %zu tensors; %s\n", o.file.c_str(), file.format(), plan.parameters.size(), correction.c_str());
    std::printf("%-*s  %-*s  %-*s  %-*s  %-7s  %s\n", static_cast<int>(wn), "name", static_cast<int>(ws), "shape",
                static_cast<int>(wf), "fans", static_cast<int>(wk), "scheme", "verdict", "worst finding");
    for (const tensor_verdict& v : verdicts) {
      std::printf("%-*s  %-*s  %-*s  %-*s  %-7s  %s\n", static_cast<int>(wn), v.name.c_str(), static_cast<int>(ws),
                  (v.shape + " " + v.dtype).c_str(), static_cast<int>(wf), v.fans.c_str(), static_cast<int>(wk),
                  v.scheme.c_str(), v.passed ? "passed" : "FAILED", v.worst.c_str());
    }
    for (const std::string& n : extra) std::printf("FAILED  %s: in the file but not in the plan\n", n.c_str());
  }
  failed.insert(failed.end(), extra.begin(), extra.end());
  if (failed.empty()) {
    if (!o.json) std::printf("audited %s: all %zu tensors passed\n", o.file.c_str(), plan.parameters.size());
    return exit_ok;
  }
  std::string list;
  for (const std::string& n : failed) list += (list.empty() ? "" : ", ") + n;
  if (!o.json) {
    std::printf("FAILED %s: %zu of %zu tensors failed: %s\n", o.file.c_str(), failed.size(),
                plan.parameters.size() + extra.size(), list.c_str());
  }
  return exit_check_failed;
}

}  // namespace kindling::tool
