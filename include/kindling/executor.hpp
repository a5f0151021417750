// Executors: who runs the tasks of a fill.
//
// An executor is anything callable as exec(n_tasks, task) with task a
// const std::function<void(std::size_t)>&, which must call task(k) exactly once for
// every k in [0, n_tasks), in any order, on any threads, and return when all are
// done (rethrowing a task's exception if one threw). serial_executor,
// thread_executor and (with OpenMP) openmp_executor are provided; a trainer's own
// thread pool becomes one with a lambda. fill.hpp checks the promise (fill_incomplete).
#ifndef KINDLING_EXECUTOR_HPP
#define KINDLING_EXECUTOR_HPP

#include <algorithm>
#include <atomic>
#include <cstddef>
#include <exception>
#include <functional>
#include <mutex>
#include <stdexcept>
#include <thread>
#include <type_traits>
#include <vector>

#include "kindling/detail/error.hpp"

namespace kindling {

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
    if (threads == 0)
      detail::reject_argument<std::invalid_argument>("thread_executor", "threads", "0", "at least 1 thread");
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

/// True if Exec can serve as an executor: callable as exec(n_tasks, task) (see the top
/// of this header).
template <class Exec>
inline constexpr bool is_executor_v =
    std::is_invocable<Exec, std::size_t, const std::function<void(std::size_t)>&>::value;

}  // namespace kindling

#endif  // KINDLING_EXECUTOR_HPP
