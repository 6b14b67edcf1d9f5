#pragma once
// Two doubles handled by one instruction: the vector extension of GCC and Clang (SSE2 on
// x86-64, NEON on AArch64), for loops the compiler does not vectorize by itself. Arithmetic
// is elementwise, a scalar operand applies to both lanes, and each lane computes exactly what
// the same expression on doubles computes. Internal to the library.

#include <cstdint>
#include <cstring>

namespace radmode::detail {

typedef double Pair __attribute__((vector_size(16)));
typedef std::uint64_t PairBits __attribute__((vector_size(16)));
/// Result of comparing two Pairs: -1 (all bits set) in a lane where it holds, else 0.
typedef std::int64_t PairMask __attribute__((vector_size(16)));

inline Pair load2(const double* p) {
  Pair v;
  std::memcpy(&v, p, sizeof v);
  return v;
}
inline void store2(double* p, Pair v) { std::memcpy(p, &v, sizeof v); }
inline Pair abs2(Pair v) {
  PairBits bits;
  std::memcpy(&bits, &v, sizeof v);
  bits &= ~(std::uint64_t{1} << 63);
  std::memcpy(&v, &bits, sizeof v);
  return v;
}
/// Per lane max(a, b) and min(a, b) with std::max / std::min's rules (the first argument
/// when the comparison is false, e.g. when b is NaN).
inline Pair max2(Pair a, Pair b) { return a < b ? b : a; }
inline Pair min2(Pair a, Pair b) { return b < a ? b : a; }

} // namespace radmode::detail
