// kindling/fill.hpp: write a distribution's values into a view, on any executor.
//
// Every value is a pure function of its global row-major index (DEVELOPERS.md,
// "Element index and words"), so a fill can be cut up any way without changing a bit.
// The cut used here is fixed anyway, so that the work done does not depend on the
// executor either:
//
//   - the region's elements, in local row-major order, are split into chunks of
//     fill_chunk_elements (16384) elements; chunk k is task k of the executor, whatever
//     the number of threads;
//   - inside a chunk, consecutive local indices whose global indices are consecutive
//     (the innermost dimension of the region, and every outer one the region covers
//     whole) form a run; runs are generated fill_buffer_elements (512) at a time into
//     a stack buffer of the compute type, cut where the global index crosses a
//     multiple of 512 (a whole number of 16-block counter groups, so the generator
//     works on full groups);
//   - each value is rounded to the element type by element.hpp's element_rounder
//     under the distribution's bounds and stored through the view's strides.
//
// An executor (executor.hpp) runs the chunks: anything callable as exec(n_tasks, task).
//
// An executor that breaks this promise is caught, not trusted: the fill marks each
// task it completes, and if the executor throws, returns with a task never run, or
// calls a task number outside [0, n_tasks), the fill throws fill_incomplete (a
// std::runtime_error; an executor's own exception is nested inside it). The tensor's
// contents are then unspecified: the chunks of completed tasks hold their values, a
// chunk cut short is partly written, the others keep what they held, and nothing is
// restored. Throws before the executor runs (bad arguments) write nothing at all.
#ifndef KINDLING_FILL_HPP
#define KINDLING_FILL_HPP

#include <algorithm>
#include <array>
#include <atomic>
#include <cstddef>
#include <cstdint>
#include <exception>
#include <functional>
#include <limits>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "kindling/detail/compiled_mode.hpp"
#include "kindling/element.hpp"
#include "kindling/executor.hpp"
#include "kindling/random/sample.hpp"
#include "kindling/random/stream.hpp"
#include "kindling/view.hpp"

namespace kindling {

/// A fill whose executor threw, skipped tasks or called a task that does not exist; the
/// view's contents are unspecified (see the top of this header). tasks_done() of
/// tasks() chunks were written completely.
class fill_incomplete : public std::runtime_error {
 public:
  fill_incomplete(const std::string& what, std::size_t done, std::size_t tasks)
      : std::runtime_error(what), done_(done), tasks_(tasks) {}
  std::size_t tasks_done() const noexcept { return done_; }
  std::size_t tasks() const noexcept { return tasks_; }

 private:
  std::size_t done_;
  std::size_t tasks_;
};

/// Elements of a view's region per executor task; fixed, never derived from the thread count.
inline constexpr std::uint64_t fill_chunk_elements = 16384;
/// Values generated per call into the stack buffer; a multiple of every counter group
/// (64 elements of a 1-word type, 32 of a 2-word type).
inline constexpr std::size_t fill_buffer_elements = 512;

namespace detail {

// What fill, fill_generated, initialize and initialize_bias check at compile time before
// anything else in their bodies, so that a misuse stops at one sentence saying what to do
// instead of an error deep in the engine. Used as static_assert(writes_into<E, Exec>()).
template <class E, class Exec>
constexpr bool writes_into() {
  static_assert(!std::is_const<E>::value,
                "kindling: the target has const elements (a const matrix or a strided_view<const T>) and cannot be "
                "written; pass the object itself, not a const reference, or a strided_view<T> of writable memory");
  static_assert(is_executor_v<Exec>,
                "kindling: the executor must be callable as exec(n_tasks, task); for 4 threads pass "
                "kindling::thread_executor(4)");
  return true;
}

// Number of executor tasks for a view.
inline std::size_t fill_task_count(std::uint64_t elements) noexcept {
  return static_cast<std::size_t>((elements + fill_chunk_elements - 1) / fill_chunk_elements);
}

// Elements rounded and stored to contiguous memory: the vector paths of
// random/detail/lanes.hpp for float and bfloat16, the rounder for the rest.
template <class E>
void store_contiguous(const element_rounder<E>& rounder, instruction_set isa,
                      const compute_type_t<E>* src, E* dst, std::size_t n, bool stream) noexcept {
  std::size_t k = 0;
  if constexpr (std::is_same<E, float>::value || std::is_same<E, bfloat16>::value) {
    if (rounder.thresholds) {
      // Non-temporal stores need aligned vectors: the elements up to a 64-byte boundary
      // go one by one.
      if (stream) {
        const auto misaligned = reinterpret_cast<std::uintptr_t>(dst) % 64;
        const std::size_t head =
            misaligned % sizeof(E) != 0 ? n : std::min(n, ((64 - misaligned) % 64) / sizeof(E));
        for (; k < head; ++k) dst[k] = rounder(src[k]);
        stream = head < n;
      }
      if constexpr (std::is_same<E, float>::value) {
        k += round_store_f32(isa, src + k, dst + k, n - k, rounder.hi_max, rounder.lo_min, stream);
      } else {
        k += round_store_bf16(isa, src + k, reinterpret_cast<std::uint16_t*>(dst + k), n - k,
                              rounder.hi_max, rounder.lo_min, stream);
      }
    }
  }
  (void)isa, (void)stream;
  for (; k < n; ++k) dst[k] = rounder(src[k]);
}

// Whether a generator also writes whole counter groups straight to memory as elements
// of type E: gen.elements(isa, g0, count, dst, hi_max, lo_min, stream) -> bool (false:
// it has no such path on isa, nothing written), with the rounder's thresholds.
template <class Gen, class E, class = void>
struct writes_elements : std::false_type {};
template <class Gen, class E>
struct writes_elements<
    Gen, E,
    std::void_t<decltype(std::declval<const Gen&>().elements(
        instruction_set::scalar, std::uint64_t{}, std::uint64_t{}, std::declval<E*>(),
        compute_type_t<E>{}, compute_type_t<E>{}, false))>> : std::true_type {};

// The generator fill() uses: the runs of a prepared distribution, and for float and
// bfloat16 elements the direct writer of whole groups.
template <class Kernel, class C>
struct distribution_runs {
  const Kernel& kernel;
  const stream& s;
  std::uint32_t dom;
  void operator()(std::uint64_t first, std::size_t n, C* out) const {
    generate_run(kernel, s, dom, first, n, out);
  }
  template <class T, class = std::enable_if_t<(std::is_same<T, float>::value || std::is_same<T, bfloat16>::value) &&
                                              std::is_same<C, float>::value>>
  bool elements(instruction_set isa, std::uint64_t g0, std::uint64_t count, T* dst, float hi_max,
                float lo_min, bool streaming) const noexcept {
    if constexpr (std::is_same<T, float>::value) {
      return vector_elements(isa, kernel, s, dom, g0, count, dst, hi_max, lo_min, streaming);
    } else {
      return vector_elements(isa, kernel, s, dom, g0, count, reinterpret_cast<std::uint16_t*>(dst), hi_max,
                             lo_min, streaming);
    }
  }
};

// How a view's region lies in its global shape and in memory, for walking it in
// row-major order.
struct region_walk {
  std::size_t rank = 0;
  // Global row-major strides.
  std::array<std::uint64_t, max_rank> global_step{};
  // The length of a global run: the innermost dimension times every outer dimension the
  // region covers whole, up to the first one it cuts.
  std::uint64_t run_length = 1;
  bool inner_contiguous = false;
  // Elements adjacent in memory: the innermost dimension, and each outer one whose stride
  // is the size of what it holds (a dense row-major block), so that a small dense tensor
  // goes to the direct writer in one piece rather than a row at a time.
  std::uint64_t memory_run = 0;

  template <class E>
  explicit region_walk(const strided_view<E>& v) : rank(v.rank()) {
    const shape& global = v.global_shape();
    const shape& extent = v.part().extent();
    bool cut = false;
    for (std::size_t d = rank; d-- > 0;) {
      global_step[d] = d + 1 == rank ? 1 : global_step[d + 1] * global[d + 1];
      if (!cut) run_length *= extent[d];
      if (extent[d] != global[d]) cut = true;
    }
    const std::size_t inner = rank - 1;
    inner_contiguous = v.stride(inner) == 1;
    memory_run = inner_contiguous ? extent[inner] : 0;
    for (std::size_t d = inner; inner_contiguous && d-- > 0;) {
      if (v.stride(d) != static_cast<std::int64_t>(memory_run)) break;
      memory_run *= extent[d];
    }
  }
};

// The position of one element of a view's region: its local multi-index and its memory
// offset, stepped in row-major order.
template <class E>
struct region_cursor {
  const strided_view<E>& v;
  std::array<std::uint64_t, max_rank> index{};
  std::ptrdiff_t at = 0;

  // Sets the position from a local row-major index.
  void seek(std::uint64_t local_index) {
    const shape& extent = v.part().extent();
    at = 0;
    for (std::size_t d = v.rank(); d-- > 0;) {
      index[d] = local_index % extent[d];
      local_index /= extent[d];
      at += static_cast<std::ptrdiff_t>(index[d]) * static_cast<std::ptrdiff_t>(v.stride(d));
    }
  }
  // The next element in row-major order, carrying into outer dimensions.
  void step() {
    const shape& extent = v.part().extent();
    for (std::size_t d = v.rank(); d-- > 0;) {
      at += static_cast<std::ptrdiff_t>(v.stride(d));
      if (++index[d] < extent[d]) break;
      at -= static_cast<std::ptrdiff_t>(extent[d]) * static_cast<std::ptrdiff_t>(v.stride(d));
      index[d] = 0;
    }
  }
  // The row-major index of the element in the global shape.
  std::uint64_t global_index(const region_walk& walk) const {
    const shape& offset = v.part().offset();
    std::uint64_t g = 0;
    for (std::size_t d = 0; d < walk.rank; ++d) g += (offset[d] + index[d]) * walk.global_step[d];
    return g;
  }
};

// The direct path: the whole counter groups among the `adjacent` elements from global
// index g (at memory dst) go straight to memory, rounded on the way (no buffer); the
// partial group before them goes through `buffer`. Returns how many elements it wrote,
// 0 when the stretch holds no whole group or the generator has no such path here.
template <class E, class Gen>
std::uint64_t write_whole_groups(const element_rounder<E>& rounder, bool stream, const Gen& gen,
                                 instruction_set isa, std::uint64_t g, std::uint64_t adjacent, E* dst,
                                 compute_type_t<E>* buffer) {
  constexpr std::uint64_t group = elements_per_group<compute_type_t<E>>;
  const std::uint64_t head = (group - g % group) % group;
  if (!rounder.thresholds || adjacent < head + group) return 0;
  const std::uint64_t whole = (adjacent - head) / group;
  if (!gen.elements(isa, (g + head) / group, whole, dst + head, rounder.hi_max, rounder.lo_min, stream)) return 0;
  if (head > 0) {
    gen(g, static_cast<std::size_t>(head), buffer);
    store_contiguous(rounder, isa, buffer, dst, static_cast<std::size_t>(head), false);
  }
  return head + whole * group;
}

// Fills local row-major indices [first_local, first_local + count) of the view's region.
// gen(global_first, n, out) writes the compute-type values of global indices
// global_first .. global_first + n - 1 (n <= fill_buffer_elements).
template <class E, class Gen>
void fill_chunk(const strided_view<E>& v, const element_rounder<E>& rounder, bool stream,
                const Gen& gen, std::uint64_t first_local, std::uint64_t count) {
  const shape& extent = v.part().extent();
  const instruction_set isa = best_instruction_set();
  const region_walk walk(v);
  region_cursor<E> cursor{v};
  cursor.seek(first_local);
  const std::size_t inner = walk.rank - 1;

  std::array<compute_type_t<E>, fill_buffer_elements> buffer;
  E* const data = v.data();
  std::uint64_t local = first_local;
  std::uint64_t remaining = count;
  bool streamed = false;
  while (remaining > 0) {
    const std::uint64_t global_index = cursor.global_index(walk);
    std::uint64_t n = std::min(remaining, walk.run_length - local % walk.run_length);
    if constexpr (writes_elements<Gen, E>::value) {
      const std::uint64_t adjacent =
          walk.inner_contiguous ? std::min(n, walk.memory_run - local % walk.memory_run) : 0;
      const std::uint64_t done =
          write_whole_groups(rounder, stream, gen, isa, global_index, adjacent, data + cursor.at, buffer.data());
      if (done > 0) {
        streamed = streamed || stream;
        local += done;
        remaining -= done;
        if (remaining > 0) cursor.seek(local);
        continue;
      }
    }
    // The buffered path: values into the buffer, then rounded into memory.
    n = std::min<std::uint64_t>(n, fill_buffer_elements - global_index % fill_buffer_elements);
    gen(global_index, static_cast<std::size_t>(n), buffer.data());
    if (walk.inner_contiguous && cursor.index[inner] + n <= extent[inner]) {
      // The n elements are adjacent in memory: store them in one go, then step past them.
      store_contiguous(rounder, isa, buffer.data(), data + cursor.at, static_cast<std::size_t>(n), stream);
      streamed = streamed || stream;
      cursor.index[inner] += n - 1;
      cursor.at += static_cast<std::ptrdiff_t>(n - 1);
      cursor.step();
    } else {
      for (std::size_t k = 0; k < n; ++k) {
        data[cursor.at] = rounder(buffer[k]);
        cursor.step();
      }
    }
    local += n;
    remaining -= n;
  }
  if (streamed) store_fence();
}

// The chunk fills of fill(): each element type with each kernel of its compute type.
// In compiled mode (detail/compiled_mode.hpp) they are instantiated once, in the
// compiled library, and users' files only declare them; PREFIX is `extern template`
// there and `template` in the library.
#define KINDLING_FILL_INSTANCE(PREFIX, E, K)                                                          \
  PREFIX void fill_chunk<E, distribution_runs<const K<compute_type_t<E>>, compute_type_t<E>>>(        \
      const strided_view<E>&, const element_rounder<E>&, bool,                                        \
      const distribution_runs<const K<compute_type_t<E>>, compute_type_t<E>>&, std::uint64_t, std::uint64_t);
#define KINDLING_FILL_INSTANCES_OF(PREFIX, E)                                                         \
  KINDLING_FILL_INSTANCE(PREFIX, E, uniform_kernel)                                                   \
  KINDLING_FILL_INSTANCE(PREFIX, E, symmetric_uniform_kernel)                                         \
  KINDLING_FILL_INSTANCE(PREFIX, E, normal_kernel)                                                    \
  KINDLING_FILL_INSTANCE(PREFIX, E, truncated_normal_kernel)
#define KINDLING_FILL_INSTANCES(PREFIX)                                                               \
  KINDLING_FILL_INSTANCES_OF(PREFIX, float)                                                           \
  KINDLING_FILL_INSTANCES_OF(PREFIX, double)                                                          \
  KINDLING_FILL_INSTANCES_OF(PREFIX, float16)                                                         \
  KINDLING_FILL_INSTANCES_OF(PREFIX, bfloat16)
#if defined(KINDLING_COMPILED)
KINDLING_FILL_INSTANCES(extern template)
#endif

// Runs chunk(k) for k in [0, n_tasks) through an executor (execute(n_tasks, task) calls
// it), and turns every way the executor can break its promise into fill_incomplete (see
// the top of this header). Not a template, so that it is compiled once in compiled mode
// (detail/compiled_mode.hpp) rather than for every element type, generator and executor.
KINDLING_COMPILED_INLINE void run_fill_tasks(
    std::size_t n_tasks, const std::function<void(std::size_t)>& chunk,
    const std::function<void(std::size_t, const std::function<void(std::size_t)>&)>& execute);

#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE void run_fill_tasks(
    std::size_t n_tasks, const std::function<void(std::size_t)>& chunk,
    const std::function<void(std::size_t, const std::function<void(std::size_t)>&)>& execute) {
  std::vector<std::atomic<bool>> completed(n_tasks);  // value-initialized: all false
  const std::function<void(std::size_t)> task = [&](std::size_t k) {
    if (k >= n_tasks) {
      throw std::out_of_range("kindling::fill: the executor called task " + std::to_string(k) +
                              "; expected a task number from 0 to " + std::to_string(n_tasks - 1));
    }
    chunk(k);
    completed[k].store(true, std::memory_order_relaxed);  // the executor's return orders it
  };
  const auto done_count = [&]() {
    return static_cast<std::size_t>(std::count_if(completed.begin(), completed.end(),
                                                  [](const std::atomic<bool>& c) { return c.load(); }));
  };
  const auto tally = [&](std::size_t done) {
    return std::to_string(done) + " of " + std::to_string(n_tasks) + " tasks (chunks of " +
           std::to_string(fill_chunk_elements) + " elements) completed; the tensor's contents are "
           "unspecified (completed chunks written, the rest partly written or as they were)";
  };
  try {
    execute(n_tasks, task);
  } catch (const std::exception& e) {
    const std::size_t done = done_count();
    std::throw_with_nested(fill_incomplete(
        std::string("kindling::fill: the executor threw (") + e.what() + ") with " + tally(done), done, n_tasks));
  } catch (...) {
    const std::size_t done = done_count();
    std::throw_with_nested(
        fill_incomplete("kindling::fill: the executor threw a non-standard exception with " + tally(done), done,
                        n_tasks));
  }
  const std::size_t done = done_count();
  if (done != n_tasks) {
    throw fill_incomplete("kindling::fill: the executor returned with " + tally(done) +
                              "; expected an executor that calls task(k) once for every k in [0, " +
                              std::to_string(n_tasks) + ")",
                          done, n_tasks);
  }
}
#endif  // KINDLING_COMPILED_DEFINITIONS

}  // namespace detail

/// Fills of at least this many bytes store with non-temporal (cache-bypassing) writes
/// where the CPU has them: such a tensor does not stay in cache anyway, and bypassing
/// it saves reading every line before writing it. The values are the same either way.
inline constexpr std::uint64_t fill_streaming_bytes = std::uint64_t{16} << 20;

/// Fills a view from a generator of global runs: gen(global_first, n, out) must write
/// the compute-type values of global row-major indices global_first .. +n-1 to out
/// (n <= fill_buffer_elements) and be safe to call from several threads at once.
/// Values are rounded to E under `bounds`. This is the engine under fill(); schemes
/// whose values are not a plain distribution use it directly. The caller validates
/// the generator's parameters before calling, so that nothing is written on bad input.
template <class E, class Gen, class Exec = serial_executor>
void fill_generated(const strided_view<E>& v, const element_bounds& bounds, const Gen& gen,
                    Exec&& exec = Exec{}) {
  static_assert(detail::writes_into<E, Exec>());
  const std::uint64_t total = v.size();
  const detail::element_rounder<E> rounder(bounds);
  const bool stream = total * sizeof(E) >= fill_streaming_bytes;
  // The chunk of task k; run_fill_tasks checks k and keeps the tally.
  const std::function<void(std::size_t)> chunk = [&](std::size_t k) {
    const std::uint64_t first = static_cast<std::uint64_t>(k) * fill_chunk_elements;
    detail::fill_chunk(v, rounder, stream, gen, first, std::min(fill_chunk_elements, total - first));
  };
  detail::run_fill_tasks(detail::fill_task_count(total), chunk,
                         [&](std::size_t n_tasks, const std::function<void(std::size_t)>& task) {
                           std::forward<Exec>(exec)(n_tasks, task);
                         });
}

/// Fills a view with distribution d drawn from stream s, domain dom. The values are
/// those of the view's region in the full global shape, whatever the strides, the
/// region and the executor. d is validated first (validate(d) throws); the view was
/// validated when it was made; on any throw before the executor runs, nothing is written.
/// The distribution is validated and prepared (parameters rounded, truncation
/// probabilities computed) once per call, not per buffer.
template <class E, class D, class Exec = serial_executor>
void fill(const strided_view<E>& v, const D& d, const stream& s, std::uint32_t dom = domain::values,
          Exec&& exec = Exec{}) {
  static_assert(detail::writes_into<E, Exec>());
  validate(d);
  using compute = compute_type_t<E>;
  const auto kernel = detail::prepare<compute>(d);
  const detail::distribution_runs<decltype(kernel), compute> gen{kernel, s, dom};
  fill_generated(v, bounds_of(d), gen, std::forward<Exec>(exec));
}

/// Lets fill() take another library's tensor objects directly: an adapter header
/// (eigen.hpp, xtensor.hpp) specializes it with `static auto view(X& x)` returning a
/// strided_view of x. The primary template has no view(), so fill(X) does not exist
/// for other types.
template <class X, class = void>
struct view_adapter {};

/// The view the adapter makes of an object x of type X (as passed, X&& deduced); only
/// exists for adapted types, so overloads taking X&& can be constrained by it.
template <class X>
using adapted_view_t = decltype(view_adapter<std::remove_reference_t<X>>::view(std::declval<X&>()));

/// The adapter's view of x (see adapted_view_t).
template <class X>
adapted_view_t<X> adapted_view(X& x) {
  return view_adapter<std::remove_reference_t<X>>::view(x);
}

/// fill() of an adapted object (an Eigen matrix, block or tensor, an xtensor
/// container or view): the same as fill(view_of(x), ...).
template <class X, class D, class Exec = serial_executor, class = adapted_view_t<X>>
void fill(X&& x, const D& d, const stream& s, std::uint32_t dom = domain::values, Exec&& exec = Exec{}) {
  fill(adapted_view(x), d, s, dom, std::forward<Exec>(exec));
}

// The views of every element type, const or not, and the rounders: in compiled mode
// instantiated once, in the compiled library (their constructors' checks are the
// largest code a file that fills a tensor would otherwise compile).
#define KINDLING_VIEW_INSTANCES(PREFIX)                                                               \
  PREFIX class strided_view<float>;                                                                   \
  PREFIX class strided_view<const float>;                                                             \
  PREFIX class strided_view<double>;                                                                  \
  PREFIX class strided_view<const double>;                                                            \
  PREFIX class strided_view<float16>;                                                                 \
  PREFIX class strided_view<const float16>;                                                           \
  PREFIX class strided_view<bfloat16>;                                                                \
  PREFIX class strided_view<const bfloat16>;                                                          \
  PREFIX struct detail::element_rounder<float>;                                                       \
  PREFIX struct detail::element_rounder<double>;                                                      \
  PREFIX struct detail::element_rounder<float16>;                                                     \
  PREFIX struct detail::element_rounder<bfloat16>;
#if defined(KINDLING_COMPILED)
KINDLING_VIEW_INSTANCES(extern template)
#endif

}  // namespace kindling

#endif  // KINDLING_FILL_HPP
