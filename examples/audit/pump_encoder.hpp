// A small layer of our own for the audit examples: the encoder of a pump's vibration
// sensor, a dense layer from 256 spectrum bins to 64 features with ReLU, initialized
// He normal from the trainer's seed. `fan_in_bug` builds it the way a common mistake
// does (the fan-in taken from a 128-bin spectrum), so the examples can show the message.
#ifndef KINDLING_EXAMPLES_AUDIT_PUMP_ENCODER_HPP
#define KINDLING_EXAMPLES_AUDIT_PUMP_ENCODER_HPP

#include <cstdint>
#include <vector>

#include <kindling/kindling.hpp>

struct pump_sensor_encoder {
  static constexpr std::uint64_t bins = 256, features = 64;
  kindling::dense layer{bins, features};
  std::vector<float> weight = std::vector<float>(bins * features);
  std::vector<float> bias = std::vector<float>(features);

  explicit pump_sensor_encoder(std::uint64_t seed, bool fan_in_bug = false) {
    const kindling::strided_view<float> w(weight.data(), kindling::shape(features, bins));
    const auto s = kindling::make_stream(seed, "pump.encoder.weight");
    if (fan_in_bug) {
      kindling::initialize(w, kindling::weight_info{kindling::fans{bins / 2, features, 1}}, kindling::he_normal{}, s);
    } else {
      kindling::initialize(w, layer, kindling::he_normal{}, s);
    }
  }
  kindling::strided_view<const float> weight_view() const {
    return kindling::strided_view<const float>(weight.data(), kindling::shape(features, bins));
  }
};

#endif
