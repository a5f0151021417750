// examples/tool/check.cpp: `kindling check` reads a weight file and runs kindling's
// audits on it: the symmetry checks always, conformance with --expect, and a ranked
// list of the schemes it fits with --identify. Exit 1 when a check fails.
#include <cctype>
#include <cmath>
#include <cstdio>
#include <optional>
#include <stdexcept>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include <kindling/audit/conformance.hpp>
#include <kindling/audit/identify.hpp>
#include <kindling/audit/structure.hpp>
#include <kindling/audit/symmetry.hpp>
#include <kindling/io/npy.hpp>

#include "schemes.hpp"
#include "tool.hpp"

namespace kindling::tool {

namespace {

using json = nlohmann::json;

// Where the file's values sit: the whole tensor (offset 0, extent = global), or the block
// of --full-shape that draw --region wrote.
struct placement {
  std::vector<std::uint64_t> global, offset, extent;
  bool whole() const { return global == extent; }
  region part() const { return region(shape(offset.begin(), offset.end()), shape(extent.begin(), extent.end())); }
};

// The deterministic schemes are checked value by value against a fresh fill.
template <class E>
std::vector<double> regenerate(const any_scheme& scheme, const placement& pl, const weight_info& w) {
  std::uint64_t n = 1;
  for (std::uint64_t e : pl.extent) n *= e;
  std::vector<E> values(static_cast<std::size_t>(n));
  const strided_view<E> view(values.data(), shape(pl.global.begin(), pl.global.end()), pl.part());
  std::visit([&](const auto& sc) { initialize(view, w, sc, make_stream(0, "unused"), serial_executor{}); }, scheme);
  std::vector<double> out(values.size());
  for (std::size_t i = 0; i < values.size(); ++i) out[i] = element_traits<E>::to_double(values[i]);
  return out;
}

audit_report exact_values(const npy_array& a, const std::vector<double>& x, const any_scheme& scheme,
                          const placement& pl, const weight_info& w, const std::string& name) {
  std::vector<double> want;
  switch (a.type) {
    case npy_type::f32: want = regenerate<float>(scheme, pl, w); break;
    case npy_type::f64: want = regenerate<double>(scheme, pl, w); break;
    case npy_type::f16: want = regenerate<float16>(scheme, pl, w); break;
    case npy_type::bf16: want = regenerate<bfloat16>(scheme, pl, w); break;
  }
  std::uint64_t wrong = 0, first = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    // equal, or both NaN never: a NaN is always wrong
    if (!(x[i] == want[i])) {
      if (wrong == 0) first = i;
      ++wrong;
    }
  }
  audit_report r(name);
  r.add({"exact-values", wrong == 0,
         wrong == 0 ? "every value is the one " + name + " gives"
                    : std::to_string(wrong) + " of " + std::to_string(x.size()) + " values differ from what " + name +
                          " gives (first at flat index " + std::to_string(first) + ": " + number_text(x[first], 9) +
                          " instead of " + number_text(want[first], 9) + ")"});
  return r;
}

// The file's values in their own element type: the conformance checks test against the
// declared distribution as stored in that type (a bf16 file against the bf16 rounding).
template <class E>
std::vector<E> as_elements(const npy_array& a) {
  std::vector<E> out(static_cast<std::size_t>(a.size()));
  for (std::uint64_t i = 0; i < a.size(); ++i) {
    const double x = a.value(i);  // exact, so rounding back gives the stored bits
    if constexpr (std::is_same<E, float16>::value) {
      out[static_cast<std::size_t>(i)] = round_to_float16(static_cast<float>(x));
    } else if constexpr (std::is_same<E, bfloat16>::value) {
      out[static_cast<std::size_t>(i)] = round_to_bfloat16(static_cast<float>(x));
    } else {
      out[static_cast<std::size_t>(i)] = static_cast<E>(x);
    }
  }
  return out;
}

template <class Scheme>
audit_report conformance_in_type(const npy_array& a, const placement& pl, const weight_info& w,
                                 const std::optional<packed_dense>& packed, const Scheme& scheme,
                                 const check_options& o) {
  audit_options options;
  options.alpha = o.alpha;
  const auto run = [&](auto element) {
    using E = decltype(element);
    const std::vector<E> values = as_elements<E>(a);
    const strided_view<const E> view(values.data(), shape(pl.global.begin(), pl.global.end()), pl.part());
    // A packed weight: check_scheme of each gate block with its own fans, at alpha / blocks.
    return packed ? check_scheme(view, *packed, scheme, options) : check_scheme(view, w, scheme, options);
  };
  switch (a.type) {
    case npy_type::f32: return run(float{});
    case npy_type::f64: return run(double{});
    case npy_type::f16: return run(float16{});
    case npy_type::bf16: return run(bfloat16{});
  }
  throw std::logic_error("unreachable");
}

audit_report expect_report(const npy_array& a, const std::vector<double>& x, const check_options& o,
                           const placement& pl, const weight_info& w, const std::optional<packed_dense>& packed) {
  const any_scheme scheme = make_scheme(o.expect);
  if (uses_fans(scheme) && (w.fans.fan_in == 0 || w.fans.fan_out == 0)) {
    throw std::invalid_argument("--expect '" + o.expect.scheme + "' needs fans, and the rank-1 shape " +
                                shape_text(pl.global) + " has none: give both --fan-in and --fan-out");
  }
  const strided_view<const double> v(x.data(), shape(a.shape.begin(), a.shape.end()));
  const std::string& s = o.expect.scheme;
  if (s == "identity" && !pl.whole() && o.region.empty()) {
    throw std::invalid_argument("--expect identity depends on where the block sits: give --region as draw was given it");
  }
  if (packed && (s == "identity" || s == "delta-orthogonal" || s == "sparse")) {
    throw std::invalid_argument("--expect " + s + " with --blocks " + std::to_string(packed->blocks()) +
                                ": expected a fan-scaled, fixed, zeros, constant or orthogonal scheme with --blocks; "
                                "check one gate block at a time (cut out of the file) for " + s);
  }
  if (s == "zeros" || s == "constant" || s == "identity") return exact_values(a, x, scheme, pl, w, s);
  if (!pl.whole() && (s == "orthogonal" || s == "delta-orthogonal" || s == "sparse")) {
    throw std::invalid_argument("--expect '" + s + "' checks the structure of the whole tensor, and FILE holds only a " +
                                shape_text(a.shape) + " block of --full-shape " + shape_text(pl.global) +
                                "; expected the whole tensor (draw it without --region)");
  }
  if (s == "orthogonal" && packed) {  // each gate block orthogonal on its own
    return check_orthogonal(v, *packed, o.expect.gain.value_or(1.0), orthogonal_tolerance(a.type));
  }
  if (s == "orthogonal") {
    return check_orthogonal(v, o.expect.gain.value_or(1.0), orthogonal_tolerance(a.type), w.layout);
  }
  if (s == "delta-orthogonal") {
    return check_delta_orthogonal(v, w, o.expect.gain.value_or(1.0), orthogonal_tolerance(a.type));
  }
  if (s == "sparse") return check_sparsity(v, o.expect.nonzero.value_or(sparse{}.nonzero), w.layout);
  return std::visit(
      [&](const auto& sc) -> audit_report {
        using S = std::decay_t<decltype(sc)>;
        if constexpr (std::is_same<S, zeros>::value || std::is_same<S, constant>::value ||
                      std::is_same<S, identity>::value || std::is_same<S, orthogonal>::value ||
                      std::is_same<S, delta_orthogonal>::value || std::is_same<S, sparse>::value) {
          throw std::logic_error("unreachable");
        } else {
          return conformance_in_type(a, pl, w, packed, sc, o);
        }
      },
      scheme);
}

// A statistic, p-value or interval bound in JSON: null when the check has none.
json number_or_null(double x) { return std::isfinite(x) ? json(x) : json(nullptr); }

json report_json(const audit_report& r) {
  json findings = json::array();
  for (const audit_finding& f : r.findings()) {
    json one = {{"check", f.check}, {"passed", f.passed}, {"sentence", f.sentence}};
    if (!std::isnan(f.p_value)) {
      one["statistic"] = number_or_null(f.statistic);
      one["p_value"] = number_or_null(f.p_value);
      one["interval"] = {number_or_null(f.lower), number_or_null(f.upper)};
    }
    findings.push_back(one);
  }
  return {{"subject", r.subject()}, {"passed", r.passed()}, {"findings", findings}};
}

// A candidate's name in the tool's spellings: "He truncated normal" -> he-truncated-normal
// (identify names candidates as the registry does, so --expect takes the name back).
std::string candidate_scheme(const scheme_candidate& c) {
  std::string name;
  for (char ch : c.scheme) name += ch == ' ' ? '-' : static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
  return name;
}

// One line a check: its name, its verdict, its sentence and, for a statistical check,
// the statistic, the p-value and the interval it accepted.
void print_report(const char* heading, const audit_report& r) {
  std::printf("%s: %s\n", heading, r.passed() ? "passed" : "FAILED");
  if (r.passed() && r.findings().size() > 1 && std::isnan(r.findings().front().p_value)) {
    bool statistical = false;
    for (const audit_finding& f : r.findings()) statistical = statistical || !std::isnan(f.p_value);
    if (!statistical) {  // structural checks only: one summary line
      std::printf("  %s\n", r.explain().c_str());
      return;
    }
  }
  for (const audit_finding& f : r.findings()) {
    std::string line = "  " + f.check + " " + (f.passed ? "passed" : "FAILED") + ": " + f.sentence;
    if (!std::isnan(f.p_value)) {
      line += " [statistic " + number_text(f.statistic, 4) + ", p = " + number_text(f.p_value, 3) + ", accepted " +
              (f.check == "ks" ? "D <= " + number_text(f.upper, 4)
                               : "[" + number_text(f.lower, 4) + ", " + number_text(f.upper, 4) + "]") +
              "]";
    }
    std::printf("%s\n", line.c_str());
  }
}

}  // namespace

int run_check(const check_options& o) {
  if (o.file.empty()) throw std::invalid_argument("FILE is missing: expected the .npy file to check");
  const npy_array a = read_npy(o.file, max_check_elements, "FILE");
  if (a.shape.empty()) {
    throw std::invalid_argument("'" + o.file + "' holds a 0-d array, expected a weight tensor of rank 1 to 5");
  }
  if (a.shape.size() > 5) {
    throw std::invalid_argument("'" + o.file + "' has rank " + std::to_string(a.shape.size()) + ", expected rank 1 to 5");
  }
  for (std::uint64_t e : a.shape) {
    if (e == 0) throw std::invalid_argument("'" + o.file + "' has shape " + shape_text(a.shape) + " with a size 0, expected a non-empty tensor");
  }
  // A file that draw --region wrote holds a block of a larger tensor, whose shape (not the
  // block's) gives the fans; the .npy header cannot record it, so --full-shape says it.
  placement pl{a.shape, std::vector<std::uint64_t>(a.shape.size(), 0), a.shape};
  if (!o.full_shape.empty()) {
    pl.global = parse_shape(o.full_shape);
    if (pl.global.size() != a.shape.size()) {
      throw std::invalid_argument("--full-shape " + o.full_shape + " has rank " + std::to_string(pl.global.size()) +
                                  ", and FILE '" + o.file + "' has shape " + shape_text(a.shape) + " of rank " +
                                  std::to_string(a.shape.size()) + "; expected the same rank");
    }
    for (std::size_t d = 0; d < a.shape.size(); ++d) {
      if (a.shape[d] > pl.global[d]) {
        throw std::invalid_argument("--full-shape " + o.full_shape + " is smaller than FILE '" + o.file + "' (shape " +
                                    shape_text(a.shape) + ") along axis " + std::to_string(d) +
                                    "; expected the shape of the whole tensor the file is a block of");
      }
    }
  } else if (!o.region.empty()) {
    throw std::invalid_argument("--region '" + o.region + "' needs --full-shape: the shape of the whole tensor");
  }
  if (!o.region.empty()) {
    parse_region(o.region, pl.global, &pl.offset, &pl.extent);
    if (pl.extent != a.shape) {
      throw std::invalid_argument("--region '" + o.region + "' is a " + shape_text(pl.extent) + " block, and FILE '" +
                                  o.file + "' holds " + shape_text(a.shape) + "; expected the region draw wrote");
    }
  }
  weight_layout layout;
  std::string layout_name;
  const fans f = resolve_fans(pl.global, o.layout, o.blocks ? std::nullopt : o.fan_in,
                              o.blocks ? std::nullopt : o.fan_out, &layout, &layout_name);
  // --blocks: FILE is a packed gate weight, checked block by block with each block's fans.
  const std::optional<packed_dense> packed =
      packed_layer(o.blocks, pl.global, "FILE '" + o.file + "' of shape " + shape_text(pl.global), layout, o.fan_in,
                   o.fan_out);
  if (packed && !pl.whole()) {
    throw std::invalid_argument("--blocks " + std::to_string(*o.blocks) + " checks a whole packed weight, and FILE '" +
                                o.file + "' is a block of --full-shape " + o.full_shape +
                                "; expected the whole weight, or no --blocks");
  }
  if (packed && o.identify) {
    throw std::invalid_argument("--identify with --blocks " + std::to_string(*o.blocks) +
                                ": expected no --identify; identify one gate block at a time (cut out of the file)");
  }
  const weight_info w{packed ? packed->layer_fans() : f, layout};
  if (o.identify && (f.fan_in == 0 || f.fan_out == 0)) {
    throw std::invalid_argument("--identify needs fans, and the rank-1 shape " + shape_text(a.shape) +
                                " has none: give both --fan-in and --fan-out");
  }
  if (!o.expect.scheme.empty()) (void)make_scheme(o.expect);  // bad arguments are bad input, before any work

  const std::vector<double> x = a.values();
  const strided_view<const double> v(x.data(), shape(a.shape.begin(), a.shape.end()));
  bool passed = true;
  json out;
  out["file"] = o.file;
  out["shape"] = a.shape;
  out["dtype"] = npy_type_name(a.type);
  if (!pl.whole()) out["full_shape"] = pl.global;
  if (!o.region.empty()) out["region"] = o.region;
  if (!layout_name.empty()) out["layout"] = layout_name;
  if (w.fans.fan_in != 0) {
    out["fans"] = {{"fan_in", w.fans.fan_in}, {"fan_out", w.fans.fan_out}, {"receptive_field", w.fans.receptive_field}};
  }
  if (packed) out["blocks"] = packed->blocks();  // "fans" are then each block's

  std::string header = o.file + ": " + npy_type_name(a.type) + " " + shape_text(a.shape);
  if (!pl.whole()) {
    header += ", a block of " + shape_text(pl.global) + (o.region.empty() ? std::string() : " (region " + o.region + ")");
  }
  if (!layout_name.empty()) header += ", layout " + layout_name;
  if (packed) header += ", " + std::to_string(packed->blocks()) + " gate blocks of " + shape_text(packed->block(0).shape);
  if (w.fans.fan_in != 0) {
    header += ", fan-in " + std::to_string(w.fans.fan_in) + ", fan-out " + std::to_string(w.fans.fan_out);
    if (packed) header += " each";
  }
  if (!o.json) std::printf("%s\n", header.c_str());

  if (a.shape.size() >= 2) {
    symmetry_options so;
    so.layout = layout;
    so.alpha = o.alpha;
    const audit_report sym = check_symmetry(v, so);
    passed = passed && sym.passed();
    out["symmetry"] = report_json(sym);
    if (!o.json) print_report("symmetry", sym);
  } else if (!o.json) {
    std::printf("symmetry: not applicable (a rank-1 tensor has no units)\n");
  }
  if (!o.expect.scheme.empty()) {
    const audit_report r = expect_report(a, x, o, pl, w, packed);
    passed = passed && r.passed();
    out["expect"] = report_json(r);
    out["expect"]["scheme"] = o.expect.scheme;
    if (!o.json) print_report(("expect " + o.expect.scheme).c_str(), r);
  }
  if (o.identify) {
    const identification id = identify_scheme(v, w);
    json candidates = json::array();
    for (const scheme_candidate& c : id.ranking) {
      json one = {{"scheme", candidate_scheme(c)}, {"fan", basis_name(c.rule.basis)}, {"description", c.name() + " with " + c.fan},
                  {"variance_fits", c.variance_fits}, {"ks_statistic", c.ks_statistic}, {"score", c.score}};
      if (!c.parameter.empty()) one["parameter"] = c.parameter;
      candidates.push_back(one);
    }
    out["candidates"] = candidates;
    if (!id.structure.empty()) out["structure"] = id.structure;
    if (!o.json) {
      if (!id.structure.empty()) {
        std::printf("identify: %s\n", id.structure.c_str());
      } else {
        std::printf("identify (best first: variance consistent, then by Kolmogorov-Smirnov p-value):\n");
        for (std::size_t i = 0; i < id.ranking.size() && i < 5; ++i) {
          const scheme_candidate& c = id.ranking[i];
          std::printf("  %zu. %-30s %-12s %-48s score %s\n", i + 1, candidate_scheme(c).c_str(), basis_name(c.rule.basis),
                      (c.name() + " with " + c.fan).c_str(), number_text(c.score, 3).c_str());
        }
      }
    }
  }
  out["passed"] = passed;
  if (o.json) std::printf("%s\n", out.dump(2).c_str());
  return passed ? exit_ok : exit_check_failed;
}

}  // namespace kindling::tool
