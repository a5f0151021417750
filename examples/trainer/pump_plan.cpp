// The start of a trainer of our own whose model is described by a plan file: a pump
// monitor that reads three signals (vibration on two axes and discharge pressure)
// through a 1-D convolutional front end, a GRU and a dense head over five conditions
// (healthy, cavitation, bearing wear, impeller imbalance, seal leak).
//
// The trainer keeps its parameters in its own storage -- std::vector for the
// convolutions and biases, column-major Eigen matrices for the GRU and the head -- and
// initializes every one of them from examples/models/pump.json with one call,
// kindling::initialize_model, through a map from parameter name to a view of its memory.
// A plan parameter the trainer does not hold, or a trainer parameter the plan leaves
// out, is an error naming it (exit 2). Then it runs one forward pass on a simulated
// signal (a demo scenario, invented) to show the storage is the model's.
//
//   pump_plan PLAN_OR_MANIFEST [CHECKPOINT.safetensors]
//
// Given a manifest (what `kindling assemble` writes beside a checkpoint) instead of the
// plan, the model is regenerated from the manifest alone and each parameter's digest is
// compared with the manifest's. Given a checkpoint, every tensor of the trainer's model
// is compared with the file's bytes (the file's row-major order, little-endian); exit 1
// names every parameter that differs.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <exception>
#include <map>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

#include <kindling/eigen.hpp>
#include <kindling/io/manifest.hpp>
#include <kindling/io/read_file.hpp>
#include <kindling/io/safetensors.hpp>
#include <kindling/model/plan.hpp>

using namespace kindling;

namespace {

constexpr std::uint64_t channels = 3, samples = 96, hidden = 40, conditions = 5;
using matrix = Eigen::MatrixXf;  // column-major: its memory order is not the file's

// The trainer's own model. Sizes are the trainer's; the plan must agree with them.
struct pump_model {
  std::vector<float> conv1_w = std::vector<float>(24 * channels * 9), conv1_b = std::vector<float>(24);
  std::vector<float> conv2_w = std::vector<float>(32 * 6 * 5), conv2_b = std::vector<float>(32);  // 4 groups
  matrix w_ih = matrix(3 * hidden, 32), w_hh = matrix(3 * hidden, hidden);  // gates: reset, update, new
  std::vector<float> b_ih = std::vector<float>(3 * hidden), b_hh = std::vector<float>(3 * hidden);
  matrix head_w = matrix(conditions, hidden);
  std::vector<float> head_b = std::vector<float>(conditions);

  // Where each parameter lives, as a view of its full logical shape.
  std::map<std::string, strided_view<float>> views() {
    const auto flat = [](std::vector<float>& v, const shape& s) { return strided_view<float>(v.data(), s); };
    return {{"front.conv1.weight", flat(conv1_w, {24, channels, 9})},
            {"front.conv1.bias", flat(conv1_b, {24})},
            {"front.conv2.weight", flat(conv2_w, {32, 6, 5})},
            {"front.conv2.bias", flat(conv2_b, {32})},
            {"gru.w_ih", view_of(w_ih)},
            {"gru.w_hh", view_of(w_hh)},
            {"gru.b_ih", flat(b_ih, {3 * hidden})},
            {"gru.b_hh", flat(b_hh, {3 * hidden})},
            {"head.weight", view_of(head_w)},
            {"head.bias", flat(head_b, {conditions})}};
  }
};

// A view's elements in the file's order (row-major over the logical shape), as
// little-endian bytes: what a checkpoint holds and what the manifest's digest covers.
std::vector<char> file_bytes(const strided_view<float>& v) {
  const shape& s = v.global_shape();
  std::vector<float> values;
  values.reserve(static_cast<std::size_t>(v.size()));
  std::vector<std::uint64_t> at(s.rank(), 0);
  for (std::uint64_t n = 0; n < v.size(); ++n) {
    std::ptrdiff_t offset = 0;
    for (std::size_t d = 0; d < s.rank(); ++d) offset += static_cast<std::ptrdiff_t>(at[d]) * v.stride(d);
    values.push_back(v.data()[offset]);
    for (std::size_t d = s.rank(); d-- > 0;) {  // next row-major index
      if (++at[d] < s[d]) break;
      at[d] = 0;
    }
  }
  std::vector<char> bytes(values.size() * sizeof(float));
  std::memcpy(bytes.data(), values.data(), bytes.size());
  to_little_endian(reinterpret_cast<unsigned char*>(bytes.data()), values.size(), sizeof(float));
  return bytes;
}

float sigmoid(float x) { return 1.0f / (1.0f + std::exp(-x)); }

// One forward pass: valid 1-D convolutions with ReLU, a GRU over time (Cho et al. 2014,
// gates in the plan's order reset, update, new), the head's softmax at the last step.
std::vector<float> forward(const pump_model& m, const matrix& signal) {
  const auto conv = [](const matrix& x, const std::vector<float>& w, const std::vector<float>& b, Eigen::Index out,
                       Eigen::Index in_per_group, Eigen::Index kernel, Eigen::Index groups) {
    const Eigen::Index steps = x.cols() - kernel + 1, out_per_group = out / groups;
    matrix y(out, steps);
    for (Eigen::Index o = 0; o < out; ++o) {
      const Eigen::Index first_in = (o / out_per_group) * in_per_group;
      for (Eigen::Index t = 0; t < steps; ++t) {
        float sum = b[static_cast<std::size_t>(o)];
        for (Eigen::Index i = 0; i < in_per_group; ++i) {
          for (Eigen::Index k = 0; k < kernel; ++k) {
            sum += w[static_cast<std::size_t>((o * in_per_group + i) * kernel + k)] * x(first_in + i, t + k);
          }
        }
        y(o, t) = std::max(sum, 0.0f);
      }
    }
    return y;
  };
  const matrix a = conv(signal, m.conv1_w, m.conv1_b, 24, channels, 9, 1);
  const matrix f = conv(a, m.conv2_w, m.conv2_b, 32, 6, 5, 4);
  const Eigen::Map<const Eigen::VectorXf> b_ih(m.b_ih.data(), 3 * hidden), b_hh(m.b_hh.data(), 3 * hidden);
  const auto h_size = static_cast<Eigen::Index>(hidden);
  Eigen::VectorXf h = Eigen::VectorXf::Zero(h_size);
  for (Eigen::Index t = 0; t < f.cols(); ++t) {
    const Eigen::VectorXf gi = m.w_ih * f.col(t) + b_ih, gh = m.w_hh * h + b_hh;
    for (Eigen::Index j = 0; j < h_size; ++j) {
      const float r = sigmoid(gi(j) + gh(j));
      const float z = sigmoid(gi(h_size + j) + gh(h_size + j));
      const float n = std::tanh(gi(2 * h_size + j) + r * gh(2 * h_size + j));
      h(j) = (1.0f - z) * n + z * h(j);
    }
  }
  const Eigen::VectorXf logits =
      m.head_w * h + Eigen::Map<const Eigen::VectorXf>(m.head_b.data(), static_cast<Eigen::Index>(conditions));
  const float top = logits.maxCoeff();
  std::vector<float> p(conditions);
  float total = 0;
  for (std::size_t c = 0; c < conditions; ++c) total += p[c] = std::exp(logits(static_cast<Eigen::Index>(c)) - top);
  for (float& x : p) x /= total;
  return p;
}

// Vibration at the running speed (two axes, a quarter period apart) and a pressure
// ripple at the blade-pass frequency (6 vanes), plus noise from a kindling stream.
matrix simulate_signal() {
  matrix x(static_cast<Eigen::Index>(channels), static_cast<Eigen::Index>(samples)), noise = x;
  fill(view_of(noise), dist::normal{0.0, 0.1}, make_stream(1, "pump.signal.noise"));
  for (Eigen::Index t = 0; t < x.cols(); ++t) {
    const double turn = 2.0 * 3.141592653589793 * static_cast<double>(t) / 24.0;  // 24 samples a revolution
    x(0, t) = static_cast<float>(std::sin(turn)) + noise(0, t);
    x(1, t) = static_cast<float>(std::cos(turn)) + noise(1, t);
    x(2, t) = static_cast<float>(0.3 * std::sin(6.0 * turn)) + noise(2, t);
  }
  return x;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2 || argc > 3) {
    std::fprintf(stderr, "usage: %s PLAN_OR_MANIFEST [CHECKPOINT.safetensors]\n", argv[0]);
    return 2;
  }
  const std::string input = argv[1];
  pump_model model;
  std::map<std::string, strided_view<float>> views = model.views();
  std::uint64_t seed = 0;
  nlohmann::json manifest;
  try {
    // A plan, or a manifest (format "kindling-manifest") to regenerate the model from.
    const nlohmann::json doc =
        parse_json_once(read_file_bounded(input, plan_max_bytes, "PLAN_OR_MANIFEST", "64 MiB"), "'" + input + "'");
    const bool from_manifest = doc.is_object() && doc.value("format", std::string()) == "kindling-manifest";
    if (from_manifest) manifest = doc;
    const model_plan plan = from_manifest ? plan_from_manifest(doc, "'" + input + "'", &seed)
                                          : plan_from_json(doc, "'" + input + "'", &seed);
    std::set<std::string> planned;
    for (const model_parameter& p : plan.parameters) planned.insert(p.name);
    for (const auto& [name, view] : views) {
      if (planned.count(name) == 0) {
        throw std::invalid_argument("'" + input + "' has no parameter '" + name + "', which the trainer holds; "
                                    "expected a plan of the pump model");
      }
    }
    // Every parameter, into the trainer's storage; the plan is checked whole first.
    initialize_model(plan, seed, [&](const model_parameter& p) -> any_tensor_view {
      const auto found = views.find(p.name);
      if (found == views.end()) {
        throw std::invalid_argument("parameter '" + p.name + "' of '" + input + "' is not one the trainer holds");
      }
      return found->second;
    });
    std::printf("initialized %zu parameters from %s '%s', seed %llu\n", plan.parameters.size(),
                from_manifest ? "manifest" : "plan", input.c_str(), static_cast<unsigned long long>(seed));
  } catch (const std::exception& e) {
    std::fprintf(stderr, "pump_plan: error: %s\n", e.what());
    return 2;
  }

  const std::vector<float> p = forward(model, simulate_signal());
  static const char* const names[conditions] = {"healthy", "cavitation", "bearing wear", "imbalance", "seal leak"};
  std::printf("untrained scores:");
  for (std::size_t c = 0; c < conditions; ++c) std::printf(" %s %.3f", names[c], static_cast<double>(p[c]));
  std::printf("\n");

  std::vector<std::string> differ;
  if (manifest.is_object()) {
    for (const nlohmann::json& r : manifest["parameters"]) {
      const std::vector<char> bytes = file_bytes(views.at(r["name"].get<std::string>()));
      parameter_digest d;
      d.update(bytes.data(), bytes.size());
      if (d.hex() != r["digest"].get<std::string>()) differ.push_back(r["name"].get<std::string>() + " (digest)");
    }
    std::printf("digests against the manifest: %zu of %zu differ\n", differ.size(), manifest["parameters"].size());
  }
  if (argc == 3) {
    try {
      const safetensors_reader file(argv[2], "CHECKPOINT");
      std::size_t compared = 0;
      for (const auto& [name, view] : views) {
        const safetensors_entry* e = file.index().find(name);
        const std::vector<char> ours = file_bytes(view);
        std::vector<char> theirs(ours.size());
        if (e != nullptr && e->dtype == element_kind::f32 && e->end - e->begin == ours.size()) {
          file.read(*e, 0, theirs.data(), theirs.size());
        }
        if (e == nullptr || theirs != ours) differ.push_back(name);
        ++compared;
      }
      std::printf("compared %zu tensors with %s byte for byte\n", compared, argv[2]);
    } catch (const std::exception& e) {
      std::fprintf(stderr, "pump_plan: error: %s\n", e.what());
      return 2;
    }
  }
  if (!differ.empty()) {
    std::string list;
    for (const std::string& n : differ) list += (list.empty() ? "" : ", ") + n;
    std::printf("FAILED: %zu parameters differ: %s\n", differ.size(), list.c_str());
    return 1;
  }
  std::printf("every parameter equal\n");
  return 0;
}
