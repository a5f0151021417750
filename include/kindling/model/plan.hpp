// kindling/model/plan.hpp: a whole model's parameters as one list, and one call that
// initializes all of them.
//
// A model_parameter is a name, an element type, a layer description (which gives its
// full shape and fans) and a scheme value (schemes/registry.hpp). initialize_model()
// fills every parameter of a plan into the caller's own storage: the caller's callback
// returns a view of where parameter p lives. The values are exactly those of the
// per-tensor call initialize(view, layer, scheme, make_stream(seed, name)), since that
// is the call made (the reproducibility contract, DEVELOPERS.md).
//
// The plan is checked whole before anything is written: names non-empty and each once,
// every scheme accepted for its parameter's shape and fans. Errors name the parameter.
#ifndef KINDLING_MODEL_PLAN_HPP
#define KINDLING_MODEL_PLAN_HPP

#include <algorithm>
#include <cstdint>
#include <cstring>
#include <set>
#include <stdexcept>
#include <string>
#include <utility>
#include <variant>
#include <vector>

#include "../element.hpp"
#include "../fan.hpp"
#include "../fill.hpp"
#include "../random/stream.hpp"
#include "../schemes/registry.hpp"
#include "../view.hpp"

namespace kindling {

/// A bias (or any other vector of `size` per-unit values): no fans of its own.
struct bias_vector {
  std::uint64_t size = 1;
  std::vector<std::uint64_t> weight_shape() const { return {size}; }
  fans layer_fans() const noexcept { return fans{0, 0, 1}; }
  void check_shape(const std::vector<std::uint64_t>& shape) const {
    detail::check_against("kindling::bias_vector::check_shape", shape, weight_shape(), {"size"},
                          weight_layout::out_in);
  }
};

/// What a parameter belongs to; the layer gives the shape and the fans.
using layer_description =
    std::variant<dense, convolution, transposed_convolution, embedding, packed_dense, bias_vector>;


struct model_parameter {
  std::string name;
  element_kind element = element_kind::f32;
  layer_description layer = bias_vector{};
  scheme_value scheme = make_scheme_value("zeros", {});
  std::vector<std::string> gate_order;  // packed layers: a label for each block, in order (optional)

  std::vector<std::uint64_t> full_shape() const {
    return std::visit([](const auto& l) { return l.weight_shape(); }, layer);
  }
  fans layer_fans() const {
    return std::visit([](const auto& l) { return l.layer_fans(); }, layer);
  }
};

struct model_plan {
  std::vector<model_parameter> parameters;

  const model_parameter* find(const std::string& name) const {
    for (const model_parameter& p : parameters) {
      if (p.name == name) return &p;
    }
    return nullptr;
  }
};

/// A view of any element type, as the storage callback of initialize_model returns it.
using any_tensor_view =
    std::variant<strided_view<float>, strided_view<double>, strided_view<float16>, strided_view<bfloat16>>;

namespace detail {

// The parameter's name before a message of the checks below (which name only their own
// argument), so that a plan's error says which parameter it is about.
[[noreturn]] inline void rethrow_for(const std::string& name, const std::exception& e) {
  throw std::invalid_argument("parameter '" + name + "': " + e.what());
}

// Checks one parameter without writing: shape, gate labels, and the scheme against the
// shape and fans (of each block, for a packed layer).
inline void check_parameter(const model_parameter& p) {
  try {
    if (p.name.empty()) reject_argument<std::invalid_argument>("kindling::check_plan", "name", "''", "a parameter name");
    if (!p.gate_order.empty()) {
      const auto* packed = std::get_if<packed_dense>(&p.layer);
      if (packed == nullptr || p.gate_order.size() != packed->blocks()) {
        reject_argument<std::invalid_argument>("kindling::check_plan", "gate_order",
                                               std::to_string(p.gate_order.size()) + " labels",
                                               "one label for each block of a packed layer");
      }
    }
    const std::vector<std::uint64_t> s = p.full_shape();
    std::visit(
        [&](const auto& l) {
          using L = std::decay_t<decltype(l)>;
          if constexpr (std::is_same<L, packed_dense>::value) {
            for (const packed_block& b : l.all_blocks()) {
              p.scheme.check(shape(b.shape.begin(), b.shape.end()), weight_info{b.block_fans, l.layout()});
            }
          } else {
            p.scheme.check(shape(s.begin(), s.end()), weight_info{l.layer_fans(), layout_of(l)});
          }
        },
        p.layer);
  } catch (const std::exception& e) {
    rethrow_for(p.name, e);
  }
}

}  // namespace detail

/// Checks a whole plan; the first problem is std::invalid_argument naming the parameter.
inline void check_plan(const model_plan& plan) {
  std::set<std::string> seen;
  for (const model_parameter& p : plan.parameters) {
    detail::check_parameter(p);
    if (!seen.insert(p.name).second) {
      detail::reject_argument<std::invalid_argument>("kindling::check_plan", "name", "'" + p.name + "'",
                                                     "each name once in the plan (it appears twice)");
    }
  }
}

/// Fills view v (the whole parameter or a region of it) with parameter p's values under
/// `seed`: initialize(v, layer, scheme, make_stream(seed, p.name)).
template <class E, class Exec = serial_executor>
void initialize_parameter(const model_parameter& p, std::uint64_t seed, const strided_view<E>& v,
                          Exec&& exec = Exec{}) {
  if (element_kind_of<std::remove_const_t<E>>::value != p.element) {
    detail::reject_argument<std::invalid_argument>(
        "kindling::initialize_parameter", "v",
        std::string("a view of ") + element_kind_name(element_kind_of<std::remove_const_t<E>>::value) + " elements",
        std::string(element_kind_name(p.element)) + " elements, the element type of parameter '" + p.name + "'");
  }
  const std::vector<std::uint64_t> want = p.full_shape();
  if (!std::equal(want.begin(), want.end(), v.global_shape().begin(), v.global_shape().end())) {
    detail::reject_argument<std::invalid_argument>(
        "kindling::initialize_parameter", "v", "a view of global shape " + v.global_shape().text(),
        "the global shape " + detail::shape_text(want) + " of parameter '" + p.name + "'");
  }
  std::visit([&](const auto& l) { initialize(v, l, p.scheme, make_stream(seed, p.name), exec); }, p.layer);
}

/// Initializes every parameter of `plan` under `seed`. storage(p) returns an
/// any_tensor_view of where parameter p lives (its full shape as the global shape, of
/// its element type). The plan is checked whole first.
template <class Storage, class Exec = serial_executor>
void initialize_model(const model_plan& plan, std::uint64_t seed, Storage&& storage, Exec&& exec = Exec{}) {
  check_plan(plan);
  for (const model_parameter& p : plan.parameters) {
    const any_tensor_view v = storage(p);
    std::visit([&](const auto& view) { initialize_parameter(p, seed, view, exec); }, v);
  }
}

/// The little-endian bytes [offset, offset + size) of parameter p's values, computed a
/// block of whole rows (first axis) at a time and kept until the reads move past it, so
/// reading a parameter front to back computes each value once with bounded memory.
class parameter_bytes {
 public:
  /// `threads` > 1 computes each block on a thread_executor of that many threads (the
  /// same bits: the values do not depend on the executor).
  parameter_bytes(const model_parameter& p, std::uint64_t seed, std::uint64_t block_bytes = std::uint64_t{1} << 22,
                  std::size_t threads = 1)
      : p_(p), seed_(seed), shape_(p.full_shape()), item_(element_kind_bytes(p.element)), threads_(threads) {
    row_elements_ = 1;
    for (std::size_t d = 1; d < shape_.size(); ++d) row_elements_ *= shape_[d];
    rows_per_block_ = std::max<std::uint64_t>(1, block_bytes / (row_elements_ * item_));
  }

  std::uint64_t size() const { return shape_[0] * row_elements_ * item_; }

  void read(std::uint64_t offset, char* out, std::size_t size) {
    while (size > 0) {
      if (offset < start_ || offset >= start_ + block_.size()) compute(offset / (row_elements_ * item_));
      const std::uint64_t at = offset - start_;
      const auto n = static_cast<std::size_t>(std::min<std::uint64_t>(size, block_.size() - at));
      std::memcpy(out, block_.data() + at, n);
      out += n;
      offset += n;
      size -= n;
    }
    // Past the last byte the block is of no more use: a writer holding one of these for
    // every parameter of a model keeps one block at a time, not one a parameter.
    if (offset >= this->size()) std::vector<char>().swap(block_);
  }

 private:
  template <class E>
  void compute_as(std::uint64_t row, std::uint64_t rows) {
    std::vector<E> values(static_cast<std::size_t>(rows * row_elements_));
    std::vector<std::uint64_t> at(shape_.size(), 0), extent = shape_;
    at[0] = row;
    extent[0] = rows;
    const strided_view<E> v(values.data(), shape(shape_.begin(), shape_.end()),
                            region(shape(at.begin(), at.end()), shape(extent.begin(), extent.end())));
    if (threads_ > 1) initialize_parameter(p_, seed_, v, thread_executor(threads_));
    else initialize_parameter(p_, seed_, v);
    block_.resize(values.size() * sizeof(E));
    std::memcpy(block_.data(), values.data(), block_.size());
    to_little_endian(reinterpret_cast<unsigned char*>(block_.data()), values.size(), sizeof(E));
  }
  void compute(std::uint64_t row) {
    const std::uint64_t rows = std::min(rows_per_block_, shape_[0] - row);
    switch (p_.element) {
      case element_kind::f32: compute_as<float>(row, rows); break;
      case element_kind::f64: compute_as<double>(row, rows); break;
      case element_kind::f16: compute_as<float16>(row, rows); break;
      case element_kind::bf16: compute_as<bfloat16>(row, rows); break;
    }
    start_ = row * row_elements_ * item_;
  }

  const model_parameter& p_;
  std::uint64_t seed_;
  std::vector<std::uint64_t> shape_;
  std::uint64_t item_, row_elements_ = 1, rows_per_block_ = 1;
  std::size_t threads_ = 1;
  std::uint64_t start_ = 0;
  std::vector<char> block_;
};

}  // namespace kindling

#endif  // KINDLING_MODEL_PLAN_HPP
