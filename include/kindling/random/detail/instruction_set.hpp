// The instruction sets the value path has code for, and which one this CPU runs.
//
// scalar (everywhere), avx2 (AVX2 + FMA, 8 lanes, two halves a group) and avx512
// (AVX-512F/DQ, 16 lanes). The x86 paths are compiled with per-function target
// attributes (random/detail/avx2.hpp, avx512.hpp), so a portable -O2 build carries them
// and uses them only where the CPU has them (__builtin_cpu_supports, asked once).
#ifndef KINDLING_RANDOM_DETAIL_INSTRUCTION_SET_HPP
#define KINDLING_RANDOM_DETAIL_INSTRUCTION_SET_HPP

#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#define KINDLING_LANES_X86 1
#endif

namespace kindling::detail {


/// The code paths of the group functions; best_instruction_set() picks the widest one
/// the CPU runs. Every path gives the same bits.
enum class instruction_set { scalar, avx2, avx512 };

inline const char* instruction_set_name(instruction_set i) noexcept {
  switch (i) {
    case instruction_set::avx2: return "avx2";
    case instruction_set::avx512: return "avx512";
    default: return "scalar";
  }
}

/// Whether this build has the path and this CPU runs it.
inline bool instruction_set_available(instruction_set i) noexcept {
#if defined(KINDLING_LANES_X86)
  switch (i) {
    case instruction_set::avx2:
      return __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
    case instruction_set::avx512:
      return __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512dq");
    default: return true;
  }
#else
  return i == instruction_set::scalar;
#endif
}

/// The widest available path, decided once (a constant of the process).
inline instruction_set best_instruction_set() noexcept {
  static const instruction_set best = instruction_set_available(instruction_set::avx512)
                                          ? instruction_set::avx512
                                          : instruction_set_available(instruction_set::avx2)
                                                ? instruction_set::avx2
                                                : instruction_set::scalar;
  return best;
}

}  // namespace kindling::detail

#endif  // KINDLING_RANDOM_DETAIL_INSTRUCTION_SET_HPP
