// bench/peak_memory.hpp: the peak extra memory of one call, for the benchmarks'
// peak_extra_MiB counters: the resident-set high-water mark (VmHWM in /proc/self/status)
// after the call, minus the resident set before it, with the mark reset through
// /proc/self/clear_refs (Linux proc(5)).
#ifndef KINDLING_BENCH_PEAK_MEMORY_HPP
#define KINDLING_BENCH_PEAK_MEMORY_HPP

#include <fstream>
#include <string>

namespace kindling_bench {

// kB of the /proc/self/status line `key` ("VmHWM:", "VmRSS:"), 0 if absent.
inline double status_kib(const std::string& key) {
  std::ifstream in("/proc/self/status");
  std::string word;
  while (in >> word) {
    if (word == key) {
      double kib = 0;
      in >> kib;
      return kib;
    }
  }
  return 0;
}

// Peak extra MiB while call() runs.
template <class Call>
double peak_extra_mib(const Call& call) {
  std::ofstream("/proc/self/clear_refs") << "5";
  const double before = status_kib("VmRSS:");
  call();
  return (status_kib("VmHWM:") - before) / 1024;
}

}  // namespace kindling_bench

#endif  // KINDLING_BENCH_PEAK_MEMORY_HPP
