// Benchmark of the block kernels on tridiagonal pencils (built, not run by ctest):
//   build/tests/bench_pencil_kernels
// On the energy-form pencil of a 2,000-point n = 3 polytrope (make_polytrope), thread CPU
// microseconds per call, the minimum of 7 runs of 2,000 calls (the machine may be shared):
//  - inertia counts (detail::inertia_below_many) for 1, 2, 4, 6 and 8 shifts in one block;
//  - one Rayleigh-quotient step (detail::rayleigh_iterate) on 1, 2, 4, 5, 6 and 8 vectors:
//    the time of 2 steps minus that of 1 (load and copy-out cancel);
//  - the residual pass on 5 vectors: the same difference with a residual target, minus the step.
#include "../../src/pencil_block.hpp"
#include "radmode/discretize.hpp"
#include "radmode/generators.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <vector>

using namespace radmode;

namespace {

double thread_us() {
  timespec t{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) * 1e6 + static_cast<double>(t.tv_nsec) * 1e-3;
}

/// Minimum over 7 runs of the mean time of `calls` calls of f [us].
template <class F> double min_us(int calls, F&& f) {
  double best = 1e300;
  for (int run = 0; run < 7; ++run) {
    const double t0 = thread_us();
    for (int c = 0; c < calls; ++c) f();
    best = std::min(best, (thread_us() - t0) / calls);
  }
  return best;
}

} // namespace

int main() {
  GeneratorOptions g;
  g.points = 2000;
  const StellarModel model = make_polytrope(3.0, g);
  const Structure s(model);
  const WeakForm f = make_stellar_form(s, SurfaceCondition::regular);
  const TridiagonalPencil p = assemble(f, {all_nodes(f), false, false});
  const int calls = 2000;
  double sink = 0;
  std::printf("pencil of %zu unknowns\n", p.size());
  for (const std::size_t width : {1u, 2u, 4u, 6u, 8u}) {
    std::vector<double> shifts(width);
    for (std::size_t b = 0; b < width; ++b) shifts[b] = 5.0 * static_cast<double>(b + 1) + 0.3;
    const double t = min_us(calls, [&] { sink += detail::inertia_below_many(p, shifts)[0]; });
    std::printf("inertia counts, %zu shifts: %.2f us\n", width, t);
  }
  // Starts: smooth vectors, reset before every call (the reset's own time cancels in the
  // differences below).
  auto rqi = [&](std::size_t width, int steps, double tol) {
    std::vector<std::vector<double>> xs(width, std::vector<double>(p.size()));
    std::vector<double> shifts(width);
    for (std::size_t b = 0; b < width; ++b) shifts[b] = 10.0 * static_cast<double>(b + 1);
    return min_us(calls / 2, [&] {
      for (std::size_t b = 0; b < width; ++b)
        for (std::size_t j = 0; j < p.size(); ++j)
          xs[b][j] = std::sin(static_cast<double>(b + 1) * M_PI * (static_cast<double>(j) + 0.5) /
                              static_cast<double>(p.size()));
      sink += detail::rayleigh_iterate(p, xs, 1, steps, 1.0, tol, shifts)[0].rho;
    });
  };
  for (const std::size_t width : {1u, 2u, 4u, 5u, 6u, 8u})
    std::printf("Rayleigh step, %zu vectors: %.2f us\n", width, rqi(width, 2, 0) - rqi(width, 1, 0));
  const double step5 = rqi(5, 2, 0) - rqi(5, 1, 0);
  std::printf("residual pass, 5 vectors: %.2f us\n", rqi(5, 2, 1e-30) - rqi(5, 1, 1e-30) - step5);
  std::printf("(checksum %g)\n", sink);
}
