// Benchmark: diagnose() (diagnostics.hpp) and validate_model() (model.hpp) on generated
// models. Built, not run by ctest:
//
//   build/tests/bench_diagnostics [REPETITIONS=500] [POINTS=2000]
//
// Generates an n = 3 polytrope and an n = 1.5 polytrope of POINTS points (Gamma1 = 5/3) and
// prints the median, mean and minimum wall time per call (the machine is shared: the median and
// the minimum are the figures to compare). Batch runs diagnose every model of a track,
// so one call on a 2,000-point model should cost a small fraction of a millisecond.
#include "radmode/diagnostics.hpp"
#include "radmode/generators.hpp"
#include "radmode/model.hpp"
#include "timing.hpp"

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <vector>

namespace {

using radmode::bench::Timing;

/// Median and mean wall time of f() over `reps` timed calls (after one untimed call).
template <class F> Timing time_calls(F f, int reps) {
  double sink = f();
  std::vector<double> t(static_cast<std::size_t>(reps));
  for (auto& dt : t) {
    const auto start = std::chrono::steady_clock::now();
    sink += f();
    dt = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  }
  if (sink == 0.12345) std::puts("");
  return radmode::bench::summarize(t);
}

void report(const char* label, const Timing& t) {
  std::printf("%-34s median %7.1f us, mean %7.1f us, min %7.1f us per call\n", label,
              1e6 * t.median_s, 1e6 * t.mean_s, 1e6 * t.min_s);
}

} // namespace

int main(int argc, char** argv) {
  const int reps = argc > 1 ? std::atoi(argv[1]) : 500;
  const long points = argc > 2 ? std::atol(argv[2]) : 2000;
  if (reps <= 0 || points < 10) {
    std::fprintf(stderr, "usage: bench_diagnostics [REPETITIONS>0] [POINTS>=10]\n");
    return 2;
  }
  radmode::GeneratorOptions g;
  g.points = static_cast<std::size_t>(points);
  const radmode::StellarModel n3 = radmode::make_polytrope(3.0, g);
  const radmode::StellarModel n15 = radmode::make_polytrope(1.5, g);
  std::printf("polytropes of %ld points; %d repetitions\n", points, reps);
  report("diagnose, n = 3",
         time_calls([&] { return radmode::diagnose(n3).hse_residual_max; }, reps));
  report("diagnose, n = 1.5",
         time_calls([&] { return radmode::diagnose(n15).hse_residual_max; }, reps));
  report("validate_model, n = 3", time_calls(
                                      [&] {
                                        radmode::validate_model(n3);
                                        return 1.0;
                                      },
                                      reps));
  return 0;
}
