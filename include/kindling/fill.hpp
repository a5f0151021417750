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
//   - each value is rounded to the element type with element_traits<E>::from_compute
//     under the distribution's bounds and stored through the view's strides.
//
// An executor is anything callable as exec(n_tasks, task) with task a
// const std::function<void(std::size_t)>&, which must call task(k) exactly once for
// every k in [0, n_tasks), in any order, on any threads, and return when all are
// done (rethrowing a task's exception if one threw). serial_executor,
// thread_executor and (with OpenMP) openmp_executor are provided; a trainer's own
// thread pool becomes one with a lambda.
#ifndef KINDLING_FILL_HPP
#define KINDLING_FILL_HPP

#include <algorithm>
#include <array>
#include <atomic>
#include <cstddef>
#include <cstdint>
#include <exception>
#include <functional>
#include <mutex>
#include <stdexcept>
#include <string>
#include <thread>
#include <type_traits>
#include <utility>
#include <vector>

#include "kindling/element.hpp"
#include "kindling/random/sample.hpp"
#include "kindling/random/stream.hpp"
#include "kindling/view.hpp"

namespace kindling {

/// Elements of a view's region per executor task; fixed, never derived from the thread count.
inline constexpr std::uint64_t fill_chunk_elements = 16384;
/// Values generated per call into the stack buffer; a multiple of every counter group
/// (64 elements of a 1-word type, 32 of a 2-word type).
inline constexpr std::size_t fill_buffer_elements = 512;

/// Runs the tasks one after another on the calling thread.
struct serial_executor {
  void operator()(std::size_t n_tasks, const std::function<void(std::size_t)>& task) const {
    for (std::size_t k = 0; k < n_tasks; ++k) task(k);
  }
};

/// Runs the tasks on up to `threads` threads (the calling thread is one of them),
/// started for the call and joined before it returns. Tasks are taken in order from
/// a shared counter. If a task throws, no further tasks start, and the first
/// exception is rethrown in the caller once every thread has stopped.
class thread_executor {
 public:
  /// One thread per hardware thread (1 if the machine does not say).
  thread_executor() noexcept : threads_(std::max(1u, std::thread::hardware_concurrency())) {}
  explicit thread_executor(std::size_t threads) : threads_(threads) {
    if (threads == 0) {
      throw std::invalid_argument(
          "kindling: argument 'threads' of thread_executor is 0; expected at least 1 thread");
    }
  }

  std::size_t threads() const noexcept { return threads_; }

  void operator()(std::size_t n_tasks, const std::function<void(std::size_t)>& task) const {
    std::atomic<std::size_t> next{0};
    std::atomic<bool> failed{false};
    std::mutex error_mutex;
    std::exception_ptr first_error;
    auto work = [&]() noexcept {
      for (;;) {
        if (failed.load(std::memory_order_relaxed)) return;
        const std::size_t k = next.fetch_add(1, std::memory_order_relaxed);
        if (k >= n_tasks) return;
        try {
          task(k);
        } catch (...) {
          std::lock_guard<std::mutex> lock(error_mutex);
          if (!first_error) first_error = std::current_exception();
          failed.store(true, std::memory_order_relaxed);
        }
      }
    };
    std::vector<std::thread> helpers;
    const std::size_t wanted = std::min(threads_, n_tasks);
    if (wanted > 1) {
      try {
        helpers.reserve(wanted - 1);
        for (std::size_t t = 1; t < wanted; ++t) helpers.emplace_back(work);
      } catch (...) {
        // Fewer threads than asked for: the ones running and this one share the tasks.
      }
    }
    work();
    for (std::thread& t : helpers) t.join();
    if (first_error) std::rethrow_exception(first_error);
  }

 private:
  std::size_t threads_;
};

#if defined(_OPENMP)
/// Runs the tasks in an OpenMP parallel loop (only when compiled with OpenMP). The
/// first exception a task throws is rethrown in the caller after the loop.
struct openmp_executor {
  void operator()(std::size_t n_tasks, const std::function<void(std::size_t)>& task) const {
    std::exception_ptr first_error;
    const auto n = static_cast<long long>(n_tasks);
#pragma omp parallel for schedule(dynamic, 1)
    for (long long k = 0; k < n; ++k) {
      try {
        task(static_cast<std::size_t>(k));
      } catch (...) {
#pragma omp critical(kindling_openmp_executor)
        if (!first_error) first_error = std::current_exception();
      }
    }
    if (first_error) std::rethrow_exception(first_error);
  }
};
#endif

namespace detail {

// Number of executor tasks for a view.
inline std::size_t fill_task_count(std::uint64_t elements) noexcept {
  return static_cast<std::size_t>((elements + fill_chunk_elements - 1) / fill_chunk_elements);
}

// Fills local row-major indices [first_local, first_local + count) of the view's region.
// gen(global_first, n, out) writes the compute-type values of global indices
// global_first .. global_first + n - 1 (n <= fill_buffer_elements).
template <class E, class Gen>
void fill_chunk(const strided_view<E>& v, const element_bounds& bounds, const Gen& gen,
                std::uint64_t first_local, std::uint64_t count) {
  using compute = compute_type_t<E>;
  const std::size_t rank = v.rank();
  const shape& global = v.global_shape();
  const shape& extent = v.part().extent();
  const shape& offset = v.part().offset();

  // Global row-major strides, and the length of a global run: the innermost dimension
  // times every outer dimension the region covers whole, up to the first one it cuts.
  std::array<std::uint64_t, max_rank> global_step{};
  std::uint64_t run_length = 1;
  bool cut = false;
  for (std::size_t d = rank; d-- > 0;) {
    global_step[d] = d + 1 == rank ? 1 : global_step[d + 1] * global[d + 1];
    if (!cut) run_length *= extent[d];
    if (extent[d] != global[d]) cut = true;
  }

  // Local multi-index of the first element and its memory offset.
  std::array<std::uint64_t, max_rank> index{};
  std::ptrdiff_t at = 0;
  std::uint64_t rest = first_local;
  for (std::size_t d = rank; d-- > 0;) {
    index[d] = rest % extent[d];
    rest /= extent[d];
    at += static_cast<std::ptrdiff_t>(index[d]) * static_cast<std::ptrdiff_t>(v.stride(d));
  }

  std::array<compute, fill_buffer_elements> buffer;
  E* const data = v.data();
  std::uint64_t local = first_local;
  std::uint64_t remaining = count;
  while (remaining > 0) {
    std::uint64_t global_index = 0;
    for (std::size_t d = 0; d < rank; ++d) global_index += (offset[d] + index[d]) * global_step[d];
    std::uint64_t n = std::min(remaining, run_length - local % run_length);
    n = std::min<std::uint64_t>(n, fill_buffer_elements - global_index % fill_buffer_elements);
    gen(global_index, static_cast<std::size_t>(n), buffer.data());
    for (std::size_t k = 0; k < n; ++k) {
      data[at] = element_traits<E>::from_compute(buffer[k], bounds);
      // Step the local index in row-major order, carrying into outer dimensions.
      for (std::size_t d = rank; d-- > 0;) {
        at += static_cast<std::ptrdiff_t>(v.stride(d));
        if (++index[d] < extent[d]) break;
        at -= static_cast<std::ptrdiff_t>(extent[d]) * static_cast<std::ptrdiff_t>(v.stride(d));
        index[d] = 0;
      }
    }
    local += n;
    remaining -= n;
  }
}

}  // namespace detail

/// Fills a view from a generator of global runs: gen(global_first, n, out) must write
/// the compute-type values of global row-major indices global_first .. +n-1 to out
/// (n <= fill_buffer_elements) and be safe to call from several threads at once.
/// Values are rounded to E under `bounds`. This is the engine under fill(); schemes
/// whose values are not a plain distribution use it directly. The caller validates
/// the generator's parameters before calling, so that nothing is written on bad input.
template <class E, class Gen, class Exec = serial_executor>
void fill_generated(const strided_view<E>& v, const element_bounds& bounds, const Gen& gen,
                    Exec&& exec = Exec{}) {
  static_assert(!std::is_const<E>::value, "fill needs a view of writable elements");
  const std::uint64_t total = v.size();
  const std::function<void(std::size_t)> task = [&](std::size_t k) {
    const std::uint64_t first = static_cast<std::uint64_t>(k) * fill_chunk_elements;
    detail::fill_chunk(v, bounds, gen, first, std::min(fill_chunk_elements, total - first));
  };
  std::forward<Exec>(exec)(detail::fill_task_count(total), task);
}

/// Fills a view with distribution d drawn from stream s, domain dom. The values are
/// those of the view's region in the full global shape, whatever the strides, the
/// region and the executor. d is validated first (validate(d) throws); the view was
/// validated when it was made; on any throw before the executor runs, nothing is written.
template <class E, class D, class Exec = serial_executor>
void fill(const strided_view<E>& v, const D& d, const stream& s, std::uint32_t dom = domain::values,
          Exec&& exec = Exec{}) {
  validate(d);
  using compute = compute_type_t<E>;
  const auto gen = [&d, &s, dom](std::uint64_t first, std::size_t n, compute* out) {
    generate(d, s, dom, first, n, out);
  };
  fill_generated(v, bounds_of(d), gen, std::forward<Exec>(exec));
}

/// Lets fill() take another library's tensor objects directly: an adapter header
/// (eigen.hpp, xtensor.hpp) specializes it with `static auto view(X& x)` returning a
/// strided_view of x. The primary template has no view(), so fill(X) does not exist
/// for other types.
template <class X, class = void>
struct view_adapter {};

/// fill() of an adapted object (an Eigen matrix, block or tensor, an xtensor
/// container or view): the same as fill(view_of(x), ...).
template <class X, class D, class Exec = serial_executor,
          class = decltype(view_adapter<std::remove_reference_t<X>>::view(std::declval<X&>()))>
void fill(X&& x, const D& d, const stream& s, std::uint32_t dom = domain::values, Exec&& exec = Exec{}) {
  fill(view_adapter<std::remove_reference_t<X>>::view(x), d, s, dom, std::forward<Exec>(exec));
}

}  // namespace kindling

#endif  // KINDLING_FILL_HPP
