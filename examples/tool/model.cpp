// examples/tool/model.cpp: whole models. `kindling assemble PLAN -o model.safetensors`
// writes every parameter of a model plan (kindling/io/manifest.hpp) into one safetensors
// file, streamed, plus a manifest of what each parameter received; `kindling verify FILE
// --manifest M` recomputes the digest of each tensor in FILE and compares it with the
// manifest's, exit 1 naming every tensor that differs (or is missing, or extra).
#include <cstdio>
#include <stdexcept>
#include <string>
#include <vector>

#include <kindling/io/manifest.hpp>

#include "output.hpp"
#include "tool.hpp"

namespace kindling::tool {

int run_assemble(const assemble_options& o) {
  if (o.plan.empty()) throw std::invalid_argument("PLAN is missing: expected a model plan .json file");
  if (o.output.empty()) throw std::invalid_argument("-o is missing: expected the output .safetensors file");
  const std::string manifest_path = o.manifest.empty() ? o.output + ".manifest.json" : o.manifest;
  std::uint64_t seed = 0;
  const model_plan plan = read_plan(o.plan, &seed, "PLAN");
  if (o.seed) seed = *o.seed;
  check_plan(plan);
  check_output("-o", o.output, {{"PLAN", o.plan}});
  check_output("--manifest", manifest_path, {{"PLAN", o.plan}, {"-o", o.output}});
  const nlohmann::json manifest = write_model_safetensors(plan, seed, o.output, "-o");
  write_output("--manifest", manifest_path, manifest.dump(2) + "\n");
  std::uint64_t bytes = 0;
  for (const nlohmann::json& r : manifest["parameters"]) bytes += r["bytes"].get<std::uint64_t>();
  std::printf("wrote %s: %zu parameters, %llu bytes of values, seed %llu; manifest %s\n", o.output.c_str(),
              plan.parameters.size(), static_cast<unsigned long long>(bytes), static_cast<unsigned long long>(seed),
              manifest_path.c_str());
  return exit_ok;
}

int run_verify(const verify_options& o) {
  if (o.file.empty()) throw std::invalid_argument("FILE is missing: expected the .safetensors checkpoint");
  if (o.manifest.empty()) throw std::invalid_argument("--manifest is missing: expected the manifest .json file");
  const nlohmann::json manifest = read_manifest(o.manifest, "--manifest");
  std::uint64_t seed = 0;
  // Validates the manifest whole (format versions, every record) before the file is read.
  const model_plan plan = plan_from_manifest(manifest, "--manifest '" + o.manifest + "'", &seed);
  const safetensors_reader file(o.file, "FILE");
  const nlohmann::json& records = manifest["parameters"];
  std::vector<std::string> failed;
  std::vector<char> buffer(std::size_t{1} << 20);
  for (std::size_t i = 0; i < plan.parameters.size(); ++i) {
    const model_parameter& p = plan.parameters[i];
    const std::string want = records[i].value("digest", std::string());
    const safetensors_entry* e = file.index().find(p.name);
    std::string verdict;
    if (e == nullptr) {
      verdict = "missing from the file";
    } else if (e->shape != p.full_shape() || e->dtype != p.element) {
      verdict = std::string("shape ") + shape_text(e->shape) + " " + safetensors_dtype_name(e->dtype) + ", expected " +
                shape_text(p.full_shape()) + " " + safetensors_dtype_name(p.element);
    } else {
      parameter_digest d;
      for (std::uint64_t off = 0; off < e->end - e->begin;) {
        const auto n = static_cast<std::size_t>(std::min<std::uint64_t>(buffer.size(), e->end - e->begin - off));
        file.read(*e, off, buffer.data(), n);
        d.update(buffer.data(), n);
        off += n;
      }
      const std::string got = d.hex();
      if (got != want) verdict = "digest " + got + " differs from the manifest's " + want;
    }
    std::printf("%-8s %s %s %s%s%s\n", verdict.empty() ? "ok" : "FAILED", p.name.c_str(), shape_text(p.full_shape()).c_str(),
                element_kind_name(p.element), verdict.empty() ? "" : ": ", verdict.c_str());
    if (!verdict.empty()) failed.push_back(p.name);
  }
  for (const safetensors_entry& e : file.index().tensors) {
    if (plan.find(e.name) == nullptr) {
      std::printf("FAILED   %s: in the file but not in the manifest\n", e.name.c_str());
      failed.push_back(e.name);
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

}  // namespace kindling::tool
