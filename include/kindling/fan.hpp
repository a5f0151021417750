// Layer descriptions -> fan-in, fan-out and receptive field.
//
// A scheme's scale is a function of the fans (Glorot & Bengio 2010: fan-in is the
// number of inputs that feed one output unit, fan-out the number of output units one
// input feeds).  Reading them off a weight tensor's shape goes wrong as soon as the
// layout is not the one the reader assumed: grouped and transposed convolutions,
// gate blocks packed into one matrix.  So each layer kind here is a small value type
// that knows its weight shape and layout, computes its fans from the connectivity,
// and checks an actual tensor shape against the layout.
//
// Counts are std::uint64_t and limited to 2^53, so that a scheme converting them to
// double gets them exactly; a larger product throws std::length_error.
#ifndef KINDLING_FAN_HPP
#define KINDLING_FAN_HPP

#include <cstddef>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "detail/compiled_mode.hpp"
#include "detail/error.hpp"

namespace kindling {

// The fans of one weight tensor (or of one packed block of it).
struct fans {
  std::uint64_t fan_in = 0;
  std::uint64_t fan_out = 0;
  std::uint64_t receptive_field = 1;  // product of the kernel's spatial sizes; 1 for dense

  friend bool operator==(const fans& a, const fans& b) noexcept {
    return a.fan_in == b.fan_in && a.fan_out == b.fan_out &&
           a.receptive_field == b.receptive_field;
  }
  friend bool operator!=(const fans& a, const fans& b) noexcept { return !(a == b); }
};

// How a weight tensor's axes are stored (row-major logical order, outermost first).
// "in" and "out" are the layer's own input and output features/channels; "spatial"
// stands for the 1 to 3 kernel axes.  With groups g, the axis written "in" of a
// convolution holds in/g and the axis "out" of a transposed convolution holds out/g.
enum class weight_layout {
  out_in,          // dense [out, in]
  in_out,          // dense [in, out]
  out_in_spatial,  // convolution [out, in/g, k...]      (OIHW-like)
  spatial_in_out,  // convolution [k..., in/g, out]      (HWIO-like)
  out_spatial_in,  // convolution [out, k..., in/g]      (OHWI-like)
  in_out_spatial,  // transposed convolution [in, out/g, k...]
  spatial_out_in,  // transposed convolution [k..., out/g, in]
};

inline std::string_view layout_name(weight_layout layout) noexcept {
  switch (layout) {
    case weight_layout::out_in: return "out_in";
    case weight_layout::in_out: return "in_out";
    case weight_layout::out_in_spatial: return "out_in_spatial";
    case weight_layout::spatial_in_out: return "spatial_in_out";
    case weight_layout::out_spatial_in: return "out_spatial_in";
    case weight_layout::in_out_spatial: return "in_out_spatial";
    case weight_layout::spatial_out_in: return "spatial_out_in";
  }
  return "unknown";
}

namespace detail {

// Largest count a double represents exactly, and with it every count and product here.
inline constexpr std::uint64_t max_exact_count = std::uint64_t{1} << 53;

// The shape checks' text and comparison: declared here, defined below in the
// header-only mode and in the compiled library otherwise (detail/compiled_mode.hpp).
KINDLING_COMPILED_INLINE std::string shape_text(const std::vector<std::uint64_t>& shape);
KINDLING_COMPILED_INLINE std::string labels_text(const std::vector<std::string>& labels);
KINDLING_COMPILED_INLINE void check_against(const char* where, const std::vector<std::uint64_t>& actual,
                                            const std::vector<std::uint64_t>& expected,
                                            const std::vector<std::string>& labels, weight_layout layout);

#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE std::string shape_text(const std::vector<std::uint64_t>& shape) {
  std::string s = "[";
  for (std::size_t i = 0; i < shape.size(); ++i) {
    if (i != 0) s += ", ";
    s += std::to_string(shape[i]);
  }
  return s + "]";
}

KINDLING_COMPILED_INLINE std::string labels_text(const std::vector<std::string>& labels) {
  std::string s = "[";
  for (std::size_t i = 0; i < labels.size(); ++i) {
    if (i != 0) s += ", ";
    s += labels[i];
  }
  return s + "]";
}
#endif

// a * b, refusing results above 2^53 (and so any 64-bit overflow).
inline std::uint64_t checked_product(std::uint64_t a, std::uint64_t b, const char* where,
                                     const char* what) {
  if (a != 0 && b > max_exact_count / a) {
    reject_argument<std::length_error>(where, what, std::to_string(a) + " * " + std::to_string(b),
                                       "at most 2^53, the largest count a double holds exactly");
  }
  return a * b;
}

inline std::uint64_t checked_product(const std::vector<std::uint64_t>& values, const char* where,
                                     const char* what) {
  std::uint64_t p = 1;
  for (std::uint64_t v : values) p = checked_product(p, v, where, what);
  return p;
}

inline void require_positive(std::uint64_t value, const char* where, const char* argument) {
  if (value == 0) {
    reject_argument<std::invalid_argument>(where, argument, "0", "a positive size");
  }
}

inline void require_divisible(std::uint64_t value, std::uint64_t groups, const char* where,
                              const char* argument) {
  if (value % groups != 0) {
    reject_argument<std::invalid_argument>(where, argument, std::to_string(value),
                                           "a multiple of groups = " + std::to_string(groups));
  }
}

inline void require_kernel(const std::vector<std::uint64_t>& kernel, const char* where) {
  if (kernel.empty() || kernel.size() > 3) {
    reject_argument<std::invalid_argument>(where, "kernel", shape_text(kernel),
                                           "1, 2 or 3 spatial dimensions (it has " +
                                               std::to_string(kernel.size()) + ")");
  }
  for (std::size_t i = 0; i < kernel.size(); ++i) {
    if (kernel[i] == 0) {
      reject_argument<std::invalid_argument>(where, "kernel", shape_text(kernel),
                                             "positive sizes (size 0 in spatial dimension " +
                                                 std::to_string(i) + ")");
    }
  }
}

inline void require_dense_layout(weight_layout layout, const char* where) {
  if (layout != weight_layout::out_in && layout != weight_layout::in_out) {
    reject_argument<std::invalid_argument>(where, "layout", layout_name(layout), "out_in or in_out");
  }
}

// Compares an actual shape with the expected one of a layout; the message names the
// argument, shows both shapes and labels the axis that disagrees.
#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE void check_against(const char* where, const std::vector<std::uint64_t>& actual,
                                            const std::vector<std::uint64_t>& expected,
                                            const std::vector<std::string>& labels, weight_layout layout) {
  if (actual == expected) return;  // the usual case: no message text to build
  const std::string want = " for layout " + std::string(layout_name(layout)) + " " +
                           labels_text(labels) + " = " + shape_text(expected);
  if (actual.size() != expected.size()) {
    reject_argument<std::invalid_argument>(where, "shape", shape_text(actual),
                                           "rank " + std::to_string(expected.size()) + want + " (it has rank " +
                                               std::to_string(actual.size()) + ")");
  }
  for (std::size_t i = 0; i < actual.size(); ++i) {
    if (actual[i] != expected[i]) {
      reject_argument<std::invalid_argument>(where, "shape", shape_text(actual),
                                             std::to_string(expected[i]) + " in dimension " + std::to_string(i) +
                                                 " (" + labels[i] + ")" + want + " (it has " +
                                                 std::to_string(actual[i]) + ")");
    }
  }
}
#endif

inline std::vector<std::string> kernel_labels(std::size_t rank) {
  std::vector<std::string> labels;
  for (std::size_t i = 0; i < rank; ++i) labels.push_back("k" + std::to_string(i));
  return labels;
}

// Shape and labels of a channel-mixing kernel: `first`, `second` are the two channel
// axes in the order the layout stores them (spatial axes before, after or between).
enum class spatial_position { last, first, middle };

inline void assemble(spatial_position where, std::uint64_t first, const char* first_label,
                     std::uint64_t second, const char* second_label,
                     const std::vector<std::uint64_t>& kernel,
                     std::vector<std::uint64_t>& shape, std::vector<std::string>& labels) {
  const std::vector<std::string> k = kernel_labels(kernel.size());
  shape.clear();
  labels.clear();
  auto put_kernel = [&] {
    shape.insert(shape.end(), kernel.begin(), kernel.end());
    labels.insert(labels.end(), k.begin(), k.end());
  };
  if (where == spatial_position::first) put_kernel();
  shape.push_back(first);
  labels.emplace_back(first_label);
  if (where == spatial_position::middle) put_kernel();
  shape.push_back(second);
  labels.emplace_back(second_label);
  if (where == spatial_position::last) put_kernel();
}

}  // namespace detail

// A fully connected layer y = W x, W of in_features inputs and out_features outputs.
// fan_in = in_features, fan_out = out_features (Glorot & Bengio 2010).
class dense {
 public:
  dense(std::uint64_t in_features, std::uint64_t out_features,
        weight_layout layout = weight_layout::out_in)
      : in_(in_features), out_(out_features), layout_(layout) {
    constexpr const char* where = "kindling::dense";
    detail::require_positive(in_features, where, "in_features");
    detail::require_positive(out_features, where, "out_features");
    detail::require_dense_layout(layout, where);
    detail::checked_product(in_features, out_features, where, "in_features * out_features");
  }

  std::uint64_t in_features() const noexcept { return in_; }
  std::uint64_t out_features() const noexcept { return out_; }
  weight_layout layout() const noexcept { return layout_; }

  std::vector<std::uint64_t> weight_shape() const {
    return layout_ == weight_layout::out_in ? std::vector<std::uint64_t>{out_, in_}
                                            : std::vector<std::uint64_t>{in_, out_};
  }
  fans layer_fans() const noexcept { return fans{in_, out_, 1}; }
  void check_shape(const std::vector<std::uint64_t>& shape) const;  // defined below

 private:
  std::uint64_t in_;
  std::uint64_t out_;
  weight_layout layout_;
};

// In the compiled library in that mode (detail/compiled_mode.hpp): every file that
// initializes a dense weight reaches it.
#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE void dense::check_shape(const std::vector<std::uint64_t>& shape) const {
  const std::vector<std::string> labels =
      layout_ == weight_layout::out_in ? std::vector<std::string>{"out_features", "in_features"}
                                       : std::vector<std::string>{"in_features", "out_features"};
  detail::check_against("kindling::dense::check_shape", shape, weight_shape(), labels, layout_);
}
#endif

namespace detail {

// What convolutions and transposed convolutions share: channels, groups, a kernel of
// 1 to 3 spatial sizes, a layout, and the same fan formulas (see the two classes).
class channel_kernel {
 public:
  std::uint64_t in_channels() const noexcept { return in_; }
  std::uint64_t out_channels() const noexcept { return out_; }
  std::uint64_t groups() const noexcept { return groups_; }
  const std::vector<std::uint64_t>& kernel() const noexcept { return kernel_; }
  weight_layout layout() const noexcept { return layout_; }

  std::vector<std::uint64_t> weight_shape() const {
    std::vector<std::uint64_t> shape;
    std::vector<std::string> labels;
    describe(shape, labels);
    return shape;
  }
  fans layer_fans() const noexcept {
    std::uint64_t rf = 1;
    for (std::uint64_t k : kernel_) rf *= k;  // bounded by the constructor's checks
    return fans{in_ / groups_ * rf, out_ / groups_ * rf, rf};
  }
  void check_shape(const std::vector<std::uint64_t>& shape) const {
    std::vector<std::uint64_t> expected;
    std::vector<std::string> labels;
    describe(expected, labels);
    check_against(check_where_, shape, expected, labels, layout_);
  }

 protected:
  channel_kernel(std::uint64_t in_channels, std::uint64_t out_channels,
                 std::vector<std::uint64_t> kernel, std::uint64_t groups, weight_layout layout,
                 const char* where, const char* check_where, bool transposed)
      : in_(in_channels), out_(out_channels), kernel_(std::move(kernel)), groups_(groups),
        layout_(layout), transposed_(transposed), check_where_(check_where) {
    require_positive(in_channels, where, "in_channels");
    require_positive(out_channels, where, "out_channels");
    require_positive(groups, where, "groups");
    require_kernel(kernel_, where);
    require_divisible(in_channels, groups, where, "in_channels");
    require_divisible(out_channels, groups, where, "out_channels");
    const bool ok = transposed ? (layout == weight_layout::in_out_spatial ||
                                  layout == weight_layout::spatial_out_in)
                               : (layout == weight_layout::out_in_spatial ||
                                  layout == weight_layout::spatial_in_out ||
                                  layout == weight_layout::out_spatial_in);
    if (!ok) {
      detail::reject_argument<std::invalid_argument>(
          where, "layout", layout_name(layout),
          transposed ? "in_out_spatial or spatial_out_in" : "out_in_spatial, spatial_in_out or out_spatial_in");
    }
    // Both store in * out / groups * receptive_field weights.
    const std::uint64_t rf = checked_product(kernel_, where, "receptive field");
    const std::uint64_t per_channel =
        checked_product(out_ / groups_, rf, where, "out_channels / groups * receptive field");
    checked_product(per_channel, in_, where, "weight element count");
    checked_product(in_ / groups_, rf, where, "in_channels / groups * receptive field");
  }

 private:
  void describe(std::vector<std::uint64_t>& shape, std::vector<std::string>& labels) const {
    if (transposed_) {
      const std::uint64_t out_per_group = out_ / groups_;
      if (layout_ == weight_layout::spatial_out_in) {
        assemble(spatial_position::first, out_per_group, "out_channels/groups", in_,
                 "in_channels", kernel_, shape, labels);
      } else {
        assemble(spatial_position::last, in_, "in_channels", out_per_group,
                 "out_channels/groups", kernel_, shape, labels);
      }
      return;
    }
    const std::uint64_t in_per_group = in_ / groups_;
    switch (layout_) {
      case weight_layout::spatial_in_out:
        assemble(spatial_position::first, in_per_group, "in_channels/groups", out_,
                 "out_channels", kernel_, shape, labels);
        break;
      case weight_layout::out_spatial_in:
        assemble(spatial_position::middle, out_, "out_channels", in_per_group,
                 "in_channels/groups", kernel_, shape, labels);
        break;
      default:
        assemble(spatial_position::last, out_, "out_channels", in_per_group,
                 "in_channels/groups", kernel_, shape, labels);
        break;
    }
  }

  std::uint64_t in_;
  std::uint64_t out_;
  std::vector<std::uint64_t> kernel_;
  std::uint64_t groups_;
  weight_layout layout_;
  bool transposed_;
  const char* check_where_;
};

// The public constructor of both layer kinds, written once: Kind names the layer in
// messages and gives its default layout and direction.
template <class Kind>
class channel_layer : public channel_kernel {
 public:
  channel_layer(std::uint64_t in_channels, std::uint64_t out_channels,
                std::vector<std::uint64_t> kernel, std::uint64_t groups = 1,
                weight_layout layout = Kind::default_layout)
      : channel_kernel(in_channels, out_channels, std::move(kernel), groups, layout, Kind::where,
                       Kind::check_where, Kind::transposed) {}
};

struct convolution_kind {
  static constexpr weight_layout default_layout = weight_layout::out_in_spatial;
  static constexpr const char* where = "kindling::convolution";
  static constexpr const char* check_where = "kindling::convolution::check_shape";
  static constexpr bool transposed = false;
};

struct transposed_convolution_kind {
  static constexpr weight_layout default_layout = weight_layout::in_out_spatial;
  static constexpr const char* where = "kindling::transposed_convolution";
  static constexpr const char* check_where = "kindling::transposed_convolution::check_shape";
  static constexpr bool transposed = true;
};

}  // namespace detail

// A convolution with 1, 2 or 3 spatial dimensions and `groups` channel groups.
// Each output unit sees in/groups channels over the kernel footprint, and each input
// unit feeds out/groups channels at each kernel offset, so
//   fan_in  = in_channels  / groups * receptive_field
//   fan_out = out_channels / groups * receptive_field
// with receptive_field the product of the kernel sizes (He et al. 2015, sec. 2.2 for
// groups = 1: n = k^2 c; the per-group counts are common practice).  Tools that read
// fan-out off the output axis of the weight get out_channels * receptive_field for a
// grouped convolution (common practice, from memory); we count connections instead.
// Layouts: out_in_spatial (default), spatial_in_out, out_spatial_in.
// Constructor: convolution(in_channels, out_channels, kernel, groups = 1,
//                          layout = out_in_spatial).
class convolution : public detail::channel_layer<detail::convolution_kind> {
 public:
  using channel_layer::channel_layer;

  // A depthwise convolution: groups = channels, each input channel feeding
  // `multiplier` output channels, so fan_in = receptive_field and
  // fan_out = multiplier * receptive_field.  The weight is that of the grouped
  // convolution in `layout` (e.g. [channels * multiplier, 1, k...]).
  static convolution depthwise(std::uint64_t channels, std::uint64_t multiplier,
                               std::vector<std::uint64_t> kernel,
                               weight_layout layout = weight_layout::out_in_spatial) {
    constexpr const char* where = "kindling::convolution::depthwise";
    detail::require_positive(channels, where, "channels");
    detail::require_positive(multiplier, where, "multiplier");
    const std::uint64_t out =
        detail::checked_product(channels, multiplier, where, "channels * multiplier");
    return convolution(channels, out, std::move(kernel), channels, layout);
  }
};

// A transposed ("fractionally strided") convolution from in_channels to out_channels.
// Its weight is commonly stored [in, out/groups, k...] because it is the adjoint of a
// convolution from out to in; the fans here are those of the transposed layer's OWN
// forward pass, not of that convolution (which would swap them):
//   fan_out = out_channels / groups * receptive_field  (each input unit scatters into
//             out/groups channels over the kernel footprint), and
//   fan_in  = in_channels / groups * receptive_field   (the weights that can reach one
//             output unit).
// With stride s > 1 an output unit receives on average only receptive_field / s^d of
// those taps; counting the full footprint regardless of stride is common practice.
// Reading this weight as if it were a convolution's [out, in/g, k...] yields the
// swapped pair (fan_in = out/g * rf, fan_out = in * rf): a known pitfall (from memory).
// Layouts: in_out_spatial (default), spatial_out_in.
// Constructor: transposed_convolution(in_channels, out_channels, kernel, groups = 1,
//                                     layout = in_out_spatial).
class transposed_convolution
    : public detail::channel_layer<detail::transposed_convolution_kind> {
 public:
  using channel_layer::channel_layer;
};

// A lookup table of `vocabulary` rows of `dimension` values, stored [vocabulary, dimension].
// Convention (ours): the table has the fans of the dense layer that reads the same
// matrix as [out = vocabulary, in = dimension], i.e. the tied output projection:
//   fan_in = dimension, fan_out = vocabulary, receptive_field = 1.
// A lookup has a single active input per output unit, so no fan count describes its
// forward variance; with this convention LeCun's 1/fan_in gives rows of expected
// squared norm 1.  Reading a 2-D table as [fan_out, fan_in] is also what shape-based
// tools do (common practice).
class embedding {
 public:
  embedding(std::uint64_t vocabulary, std::uint64_t dimension)
      : vocabulary_(vocabulary), dimension_(dimension) {
    constexpr const char* where = "kindling::embedding";
    detail::require_positive(vocabulary, where, "vocabulary");
    detail::require_positive(dimension, where, "dimension");
    detail::checked_product(vocabulary, dimension, where, "vocabulary * dimension");
  }

  std::uint64_t vocabulary() const noexcept { return vocabulary_; }
  std::uint64_t dimension() const noexcept { return dimension_; }

  std::vector<std::uint64_t> weight_shape() const { return {vocabulary_, dimension_}; }
  fans layer_fans() const noexcept { return fans{dimension_, vocabulary_, 1}; }
  void check_shape(const std::vector<std::uint64_t>& shape) const {
    detail::check_against("kindling::embedding::check_shape", shape, weight_shape(),
                          {"vocabulary", "dimension"}, weight_layout::out_in);
  }

 private:
  std::uint64_t vocabulary_;
  std::uint64_t dimension_;
};

// One block of a packed weight: where it sits and the fans to initialize it with.
struct packed_block {
  std::uint64_t index = 0;               // b in [0, blocks)
  std::size_t axis = 0;                  // the stacking axis of the full weight
  std::uint64_t offset = 0;              // first index of the block along `axis`
  std::vector<std::uint64_t> shape;      // the block's own shape
  fans block_fans;                       // fan_out = the block's rows, not blocks * rows
};

// k dense blocks of the same size stacked along the output axis of one weight: LSTM
// gates (4), GRU gates (3), fused query/key/value projections (3).  Each block is its
// own dense layer in_features -> block_out_features, so its fans are
// (in_features, block_out_features); the full weight's output axis holds
// blocks * block_out_features.  The order of the gates inside is the user's.
class packed_dense {
 public:
  packed_dense(std::uint64_t blocks, std::uint64_t in_features, std::uint64_t block_out_features,
               weight_layout layout = weight_layout::out_in)
      : blocks_(blocks), in_(in_features), block_out_(block_out_features), layout_(layout) {
    constexpr const char* where = "kindling::packed_dense";
    detail::require_positive(blocks, where, "blocks");
    detail::require_positive(in_features, where, "in_features");
    detail::require_positive(block_out_features, where, "block_out_features");
    detail::require_dense_layout(layout, where);
    const std::uint64_t rows =
        detail::checked_product(blocks, block_out_features, where, "blocks * block_out_features");
    detail::checked_product(rows, in_features, where, "weight element count");
  }

  // Input-to-hidden (in_features = input size) or hidden-to-hidden (= hidden) weights.
  static packed_dense lstm(std::uint64_t in_features, std::uint64_t hidden,
                           weight_layout layout = weight_layout::out_in) {
    return packed_dense(4, in_features, hidden, layout);
  }
  static packed_dense gru(std::uint64_t in_features, std::uint64_t hidden,
                          weight_layout layout = weight_layout::out_in) {
    return packed_dense(3, in_features, hidden, layout);
  }
  // Query, key and value projections of width `projection` from `model_width` inputs.
  static packed_dense fused_qkv(std::uint64_t model_width, std::uint64_t projection,
                                weight_layout layout = weight_layout::out_in) {
    return packed_dense(3, model_width, projection, layout);
  }

  std::uint64_t blocks() const noexcept { return blocks_; }
  std::uint64_t in_features() const noexcept { return in_; }
  std::uint64_t block_out_features() const noexcept { return block_out_; }
  weight_layout layout() const noexcept { return layout_; }
  std::size_t stacking_axis() const noexcept { return layout_ == weight_layout::out_in ? 0 : 1; }

  std::vector<std::uint64_t> weight_shape() const {
    const std::uint64_t rows = blocks_ * block_out_;
    return layout_ == weight_layout::out_in ? std::vector<std::uint64_t>{rows, in_}
                                            : std::vector<std::uint64_t>{in_, rows};
  }
  // The fans every block is initialized with (all blocks are alike).
  fans layer_fans() const noexcept { return fans{in_, block_out_, 1}; }

  packed_block block(std::uint64_t b) const {
    if (b >= blocks_) {
      detail::reject_argument<std::invalid_argument>("packed_dense::block", "b", std::to_string(b),
                                                     "a block index below " + std::to_string(blocks_));
    }
    packed_block out;
    out.index = b;
    out.axis = stacking_axis();
    out.offset = b * block_out_;
    out.shape = layout_ == weight_layout::out_in ? std::vector<std::uint64_t>{block_out_, in_}
                                                 : std::vector<std::uint64_t>{in_, block_out_};
    out.block_fans = layer_fans();
    return out;
  }
  std::vector<packed_block> all_blocks() const {
    std::vector<packed_block> out;
    for (std::uint64_t b = 0; b < blocks_; ++b) out.push_back(block(b));
    return out;
  }

  void check_shape(const std::vector<std::uint64_t>& shape) const {
    const char* rows = "blocks*block_out_features";
    const std::vector<std::string> labels =
        layout_ == weight_layout::out_in ? std::vector<std::string>{rows, "in_features"}
                                         : std::vector<std::string>{"in_features", rows};
    detail::check_against("kindling::packed_dense::check_shape", shape, weight_shape(), labels,
                          layout_);
  }

 private:
  std::uint64_t blocks_;
  std::uint64_t in_;
  std::uint64_t block_out_;
  weight_layout layout_;
};

// Raw-shape fallback for tools that hold only a tensor shape: the fans of a weight of
// `shape` stored in `layout` with `groups` channel groups, by the same definitions as
// the descriptions above (dense layouts need rank 2, convolution layouts rank 3 to 5).
inline fans fans_from_shape(const std::vector<std::uint64_t>& shape, weight_layout layout,
                            std::uint64_t groups = 1) {
  constexpr const char* where = "kindling::fans_from_shape";
  detail::require_positive(groups, where, "groups");
  for (std::size_t i = 0; i < shape.size(); ++i) {
    if (shape[i] == 0) {
      detail::reject_argument<std::invalid_argument>(where, "shape", detail::shape_text(shape),
                                                     "positive sizes (size 0 in dimension " + std::to_string(i) + ")");
    }
  }
  detail::checked_product(shape, where, "weight element count");
  const bool is_dense = layout == weight_layout::out_in || layout == weight_layout::in_out;
  if (is_dense ? shape.size() != 2 : (shape.size() < 3 || shape.size() > 5)) {
    detail::reject_argument<std::invalid_argument>(
        where, "shape", detail::shape_text(shape),
        std::string("rank ") + (is_dense ? "2" : "3 to 5") + " for layout " + std::string(layout_name(layout)) +
            " (it has rank " + std::to_string(shape.size()) + ")");
  }
  if (is_dense && groups != 1) {
    detail::reject_argument<std::invalid_argument>(where, "groups", std::to_string(groups),
                                                   "1 for a dense layout");
  }
  const std::size_t r = shape.size();
  switch (layout) {
    case weight_layout::out_in: return dense(shape[1], shape[0]).layer_fans();
    case weight_layout::in_out: return dense(shape[0], shape[1]).layer_fans();
    case weight_layout::out_in_spatial:
      detail::require_divisible(shape[0], groups, where, "shape[0] (out_channels)");
      return convolution(detail::checked_product(shape[1], groups, where, "in_channels"),
                         shape[0], {shape.begin() + 2, shape.end()}, groups, layout)
          .layer_fans();
    case weight_layout::spatial_in_out:
      detail::require_divisible(shape[r - 1], groups, where, "shape[last] (out_channels)");
      return convolution(detail::checked_product(shape[r - 2], groups, where, "in_channels"),
                         shape[r - 1], {shape.begin(), shape.end() - 2}, groups, layout)
          .layer_fans();
    case weight_layout::out_spatial_in:
      detail::require_divisible(shape[0], groups, where, "shape[0] (out_channels)");
      return convolution(detail::checked_product(shape[r - 1], groups, where, "in_channels"),
                         shape[0], {shape.begin() + 1, shape.end() - 1}, groups, layout)
          .layer_fans();
    case weight_layout::in_out_spatial:
      detail::require_divisible(shape[0], groups, where, "shape[0] (in_channels)");
      return transposed_convolution(
                 shape[0], detail::checked_product(shape[1], groups, where, "out_channels"),
                 {shape.begin() + 2, shape.end()}, groups, layout)
          .layer_fans();
    case weight_layout::spatial_out_in:
      detail::require_divisible(shape[r - 1], groups, where, "shape[last] (in_channels)");
      return transposed_convolution(
                 shape[r - 1], detail::checked_product(shape[r - 2], groups, where, "out_channels"),
                 {shape.begin(), shape.end() - 2}, groups, layout)
          .layer_fans();
  }
  detail::reject_argument<std::invalid_argument>(where, "layout",
                                                 std::to_string(static_cast<int>(layout)),
                                                 "one of the weight_layout enumerators");
}

}  // namespace kindling

#endif  // KINDLING_FAN_HPP
