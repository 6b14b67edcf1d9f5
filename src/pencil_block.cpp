#include "pencil_block.hpp"

#include "pair.hpp"

#include "radmode/error.hpp"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>
#include <type_traits>
#include <utility>

// The four-lane kernels: x86-64 with GCC (its `target` pragma compiles one region of this file
// for AVX2; Clang builds use the portable kernels).
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__)
#define RADMODE_WIDE_KERNEL 1
#include <immintrin.h>
#else
#define RADMODE_WIDE_KERNEL 0
#endif

namespace radmode::detail {

namespace {

constexpr double eps = std::numeric_limits<double>::epsilon();

/// Largest number of shifts or vectors advanced together.
constexpr std::size_t max_width = 8;

/// Calls f(std::integral_constant<std::size_t, B>{}) for B = width (1..max_width).
template <class F> void with_width(std::size_t width, F&& f) {
  switch (width) {
  case 1: f(std::integral_constant<std::size_t, 1>{}); break;
  case 2: f(std::integral_constant<std::size_t, 2>{}); break;
  case 3: f(std::integral_constant<std::size_t, 3>{}); break;
  case 4: f(std::integral_constant<std::size_t, 4>{}); break;
  case 5: f(std::integral_constant<std::size_t, 5>{}); break;
  case 6: f(std::integral_constant<std::size_t, 6>{}); break;
  case 7: f(std::integral_constant<std::size_t, 7>{}); break;
  default: f(std::integral_constant<std::size_t, 8>{}); break;
  }
}

/// Splits `total` items into chunks of at most max_width, as even as possible, and calls
/// chunk(first, width) for each.
template <class F> void for_chunks(std::size_t total, F&& chunk) {
  if (total == 0) return;
  const std::size_t chunks = (total + max_width - 1) / max_width;
  std::size_t first = 0;
  for (std::size_t c = 0; c < chunks; ++c) {
    const std::size_t width = (total - first + (chunks - c) - 1) / (chunks - c);
    chunk(first, width);
    first += width;
  }
}

constexpr std::size_t zero_mark = static_cast<std::size_t>(-1); ///< a removed end: value 0
constexpr std::size_t end_mark = static_cast<std::size_t>(-2);  ///< ends a source list

/// Work arrays of the block iteration, kept per thread and reused: allocating and zeroing
/// them for every call cost as much as the arithmetic.
struct Workspace {
  std::vector<double> x, y, dinv;
  std::vector<double> rows; ///< per row of the last step's vector: K y, M y
  void reserve(std::size_t size) {
    for (auto* v : {&x, &y, &dinv})
      if (v->size() < size) v->resize(size);
  }
};
thread_local Workspace t_work;

// --- The block kernels (inertia counts, Rayleigh quotient iteration), once per width ----

namespace portable {
using Vec = Pair;
using VecMask = PairMask;
constexpr std::size_t W = 2;
inline Vec vload(const double* p) { return load2(p); }
inline void vstore(double* p, Vec v) { store2(p, v); }
inline Vec vabs(Vec v) { return abs2(v); }
inline Vec vsplat(double v) { return Vec{v, v}; }
inline bool any_lane(VecMask m) { return (m[0] | m[1]) != 0; }
#include "rqi_kernel.inc"
} // namespace portable

#if RADMODE_WIDE_KERNEL
// Four lanes with AVX2 (x86-64, GCC): two vector instructions instead of three per operation
// on five vectors. Compiled for AVX2 only here, used only where the processor has it
// (wide_kernel_usable()); without FMA, so every lane rounds as the portable kernel does.
#pragma GCC push_options
#pragma GCC target("avx2")
namespace wide {
// (The four-lane twins of pair.hpp's load2, store2 and abs2, defined inside the region so
// that they are compiled for AVX2: a template from pair.hpp instantiated for 32-byte vectors
// would be compiled for the baseline, with the vector-ABI warning.)
typedef double Vec __attribute__((vector_size(32)));
typedef std::int64_t VecMask __attribute__((vector_size(32)));
typedef std::uint64_t VecBits __attribute__((vector_size(32)));
constexpr std::size_t W = 4;
inline Vec vload(const double* p) {
  Vec v;
  std::memcpy(&v, p, sizeof v);
  return v;
}
inline void vstore(double* p, Vec v) { std::memcpy(p, &v, sizeof v); }
inline Vec vabs(Vec v) {
  VecBits bits;
  std::memcpy(&bits, &v, sizeof v);
  bits &= ~(std::uint64_t{1} << 63);
  std::memcpy(&v, &bits, sizeof v);
  return v;
}
inline Vec vsplat(double v) { return Vec{v, v, v, v}; }
inline bool any_lane(VecMask m) { // one test instruction (vptest), not three extractions
  const __m256i bits = reinterpret_cast<__m256i>(m);
  return _mm256_testz_si256(bits, bits) == 0;
}
#include "rqi_kernel.inc"

/// iterate_block<B> of this kernel behind a call with no vector arguments (callable from code
/// compiled for the baseline instruction set).
template <std::size_t B>
__attribute__((noinline)) void iterate(const TridiagonalPencil& p, std::vector<double>* const* xs,
                                       const double* first_shift, int min_steps, int max_steps,
                                       double scale, double residual_tol, double kmax, double mmax,
                                       const Prolongation* from, RqiStats* stats) {
  iterate_block<B>(p, xs, first_shift, min_steps, max_steps, scale, residual_tol, kmax, mmax,
                   from, stats);
}
/// count_block<B> of this kernel behind a call with no vector arguments.
template <std::size_t B>
__attribute__((noinline)) void count(const TridiagonalPencil& p, const double* shifts, int* out) {
  count_block<B>(p, shifts, out);
}
} // namespace wide
#pragma GCC pop_options
#endif

/// Whether rayleigh_iterate takes the wide kernel: built in, the processor has AVX2, and not
/// switched off (use_wide_kernel).
std::atomic<bool> wide_kernel_on{true};
bool wide_kernel_usable() {
#if RADMODE_WIDE_KERNEL
  static const bool cpu = __builtin_cpu_supports("avx2") != 0;
  return cpu;
#else
  return false;
#endif
}
} // namespace

/// max |K_jj| and max M_jj. (Not inlined: inside rayleigh_iterate, whose lambdas take the
/// maxima by reference, GCC kept the running maxima in memory, a store on every row.)
#if defined(__GNUC__)
__attribute__((noinline))
#endif
std::pair<double, double> largest_diagonals(const TridiagonalPencil& p) {
  double kmax = 0, mmax = 0;
  for (std::size_t j = 0; j < p.size(); ++j) {
    kmax = std::max(kmax, std::abs(p.k_diag[j]));
    mmax = std::max(mmax, p.m_diag[j]);
  }
  return {kmax, mmax};
}

bool wide_kernel_available() { return wide_kernel_usable(); }

void use_wide_kernel(bool on) { wide_kernel_on.store(on, std::memory_order_relaxed); }

std::vector<int> inertia_below_many(const TridiagonalPencil& p, const std::vector<double>& shifts) {
  std::vector<int> counts(shifts.size(), 0);
  for_chunks(shifts.size(), [&](std::size_t first, std::size_t width) {
    with_width(width, [&](auto w) {
      constexpr std::size_t B = decltype(w)::value;
#if RADMODE_WIDE_KERNEL
      if (B >= 3 && wide_kernel_on.load(std::memory_order_relaxed) && wide_kernel_usable()) {
        wide::count<B>(p, &shifts[first], &counts[first]);
        return;
      }
#endif
      portable::count_block<B>(p, &shifts[first], &counts[first]);
    });
  });
  return counts;
}

std::vector<RqiStats> rayleigh_iterate(const TridiagonalPencil& p,
                                     std::vector<std::vector<double>>& xs, int min_steps,
                                     int max_steps, double scale, double residual_tol,
                                     const std::vector<double>& first_shifts,
                                     const Prolongation* from) {
  const std::size_t expected = from ? from->coarse.size() : p.size();
  for (const auto& x : xs)
    if (x.size() != expected) throw UsageError("Rayleigh quotient iteration: vector of the wrong size");
  const std::pair<double, double> largest = largest_diagonals(p);
  const double kmax = largest.first, mmax = largest.second;
  const std::size_t count = xs.size();
  const double nan = std::numeric_limits<double>::quiet_NaN();
  std::vector<RqiStats> stats(count, RqiStats{nan, nan, nan, nan, nan, nan, 0});
  // Blocks of up to max_width vectors, each iterated to the end on its own (a vector that has
  // converged rides along with its block at no extra pass over the mesh).
  for_chunks(count, [&](std::size_t first, std::size_t width) {
    std::vector<double>* ptr[max_width];
    double given[max_width];
    for (std::size_t b = 0; b < width; ++b) {
      const std::size_t i = first + b;
      ptr[b] = &xs[i];
      given[b] = i < first_shifts.size() ? first_shifts[i] : nan;
    }
    with_width(width, [&](auto w) {
      constexpr std::size_t B = decltype(w)::value;
#if RADMODE_WIDE_KERNEL
      // (Three or more vectors: with one or two, four lanes would only add idle ones.)
      if (B >= 3 && wide_kernel_on.load(std::memory_order_relaxed) && wide_kernel_usable()) {
        wide::iterate<B>(p, ptr, given, min_steps, max_steps, scale, residual_tol, kmax, mmax,
                         from, &stats[first]);
        return;
      }
#endif
      portable::iterate_block<B>(p, ptr, given, min_steps, max_steps, scale, residual_tol, kmax,
                                 mmax, from, &stats[first]);
    });
  });
  return stats;
}

std::optional<MeshLevel> coarsen(const std::vector<std::size_t>& fn, bool fix_first,
                                 const TridiagonalPencil& pf, const std::vector<double>& x,
                                 const std::vector<std::size_t>& kept_base) {
  // The kept base nodes' positions in fn (increasing, as both lists are).
  std::vector<std::size_t> kept;
  auto from = fn.begin();
  for (const std::size_t k : kept_base) {
    from = std::lower_bound(from, fn.end(), k);
    if (from == fn.end()) break;
    if (*from == k) kept.push_back(static_cast<std::size_t>(from - fn.begin()));
  }
  const std::vector<std::size_t> pos = every_other_node_keeping(fn.size() - 1, kept); // in fn
  MeshLevel c;
  c.fix_first = fix_first;
  c.nodes.reserve(pos.size());
  for (const std::size_t i : pos) c.nodes.push_back(fn[i]);
  const std::size_t first = fix_first ? 1 : 0; // first node (of either list) with an unknown
  const std::size_t nc = c.nodes.size() - first;
  if (nc < 2) return std::nullopt;
  if (pf.size() + first != fn.size()) throw UsageError("coarse mesh: fine pencil and node list differ");

  // Consecutive coarse nodes are either neighbours on the fine list or have one fine node m
  // between them, interpolated as (1 - t) u_J + t u_{J+1}. With A the fine matrix (entries of
  // a removed Dirichlet node are 0), P^T A P is, per coarse node J at fine position f with
  // midpoints m- (weight t- of J) before and m+ (weight 1 - t+ of J) after it,
  //   A_c(J, J)     = A(f, f) + 2 w- A(m-, f) + w-^2 A(m-, m-) + 2 w+ A(f, m+) + w+^2 A(m+, m+)
  //   A_c(J, J + 1) = A(f, f+1)                                        (neighbours)
  //                 = t A(f, m) + t (1 - t) A(m, m) + (1 - t) A(m, f')   (midpoint m)
  // which equals assembling the coarse elements directly (nested spaces, shared quadrature).
  // Computed per interval of the coarse mesh (each weight divided out once), in the order
  // of the formula: A(f, f), then the midpoint before, then the midpoint after.
  TridiagonalPencil& pc = c.pencil;
  pc.k_diag.resize(nc);
  pc.m_diag.resize(nc);
  pc.k_off.resize(nc - 1);
  pc.m_off.resize(nc - 1);
  pc.node.assign(c.nodes.begin() + static_cast<std::ptrdiff_t>(first), c.nodes.end());
  const std::size_t last = pos.size() - 1;
  const double* const kd = pf.k_diag.data();
  const double* const md = pf.m_diag.data();
  const double* const ko = pf.k_off.data();
  const double* const mo = pf.m_off.data();
  double* const ckd = pc.k_diag.data();
  double* const cmd = pc.m_diag.data();
  double* const cko = pc.k_off.data();
  double* const cmo = pc.m_off.data();
  for (std::size_t J = first; J <= last; ++J) {
    ckd[J - first] = kd[pos[J] - first];
    cmd[J - first] = md[pos[J] - first];
  }
  for (std::size_t J = 0; J < last; ++J) {
    const std::size_t f = pos[J], g = pos[J + 1];
    const bool unknown = J >= first; // (the removed first node takes no row)
    if (g == f + 2) { // midpoint m: the weight of J there is wf, that of J + 1 is wg
      const std::size_t m = f + 1;
      const double xf = x[fn[f]], xm = x[fn[m]], xg = x[fn[g]];
      const double wg = (xm - xf) / (xg - xf), wf = (xg - xm) / (xg - xf);
      const double kdm = kd[m - first], mdm = md[m - first], kom = ko[m - first], mom = mo[m - first];
      if (unknown) {
        const double kof = ko[f - first], mof = mo[f - first], t = 1.0 - wf;
        ckd[J - first] += 2 * wf * kof + wf * wf * kdm;
        cmd[J - first] += 2 * wf * mof + wf * wf * mdm;
        cko[J - first] = t * kof + t * wf * kdm + wf * kom;
        cmo[J - first] = t * mof + t * wf * mdm + wf * mom;
      }
      ckd[J + 1 - first] += 2 * wg * kom + wg * wg * kdm;
      cmd[J + 1 - first] += 2 * wg * mom + wg * wg * mdm;
    } else if (unknown) { // neighbours
      cko[J - first] = ko[f - first];
      cmo[J - first] = mo[f - first];
    }
  }
  return c;
}

} // namespace radmode::detail
