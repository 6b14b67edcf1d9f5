// Benchmark of the shooting check (shooting.hpp): wall time of verify_modes per mode.
//
//   build/tests/bench_shooting [POINTS=2000] [COUNT=5] [REPEAT=3]
//
// Generates an n = 3 polytrope of POINTS points (Gamma1 = 5/3), solves COUNT modes with the
// finite elements (not timed), then times verify_modes (shooting every mode from its FE value,
// including the two looser solves of the error estimate) REPEAT times and prints the best
// time per mode and the mean number of mismatch evaluations per mode.
#include "radmode/eigensolve.hpp"
#include "radmode/generators.hpp"
#include "radmode/shooting.hpp"

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>

int main(int argc, char** argv) {
  const long points = argc > 1 ? std::atol(argv[1]) : 2000;
  const int count = argc > 2 ? std::atoi(argv[2]) : 5;
  const int repeat = argc > 3 ? std::atoi(argv[3]) : 3;
  if (points < 10 || count < 1 || repeat < 1) {
    std::fprintf(stderr, "usage: bench_shooting [POINTS>=10] [COUNT>=1] [REPEAT>=1]\n");
    return 2;
  }
  radmode::GeneratorOptions g;
  g.points = static_cast<std::size_t>(points);
  const radmode::StellarModel model = radmode::make_polytrope(3.0, g);
  radmode::SolveOptions so;
  so.count = count;
  const radmode::ModeSet set = radmode::solve_modes(model, so);

  double best = 1e300;
  long evaluations = 0;
  int agree = 0;
  for (int r = 0; r < repeat; ++r) {
    const auto t0 = std::chrono::steady_clock::now();
    const auto check = radmode::verify_modes(model, set);
    const auto t1 = std::chrono::steady_clock::now();
    best = std::min(best, std::chrono::duration<double>(t1 - t0).count());
    evaluations = 0;
    agree = 0;
    for (const auto& v : check) {
      evaluations += v.shoot.iterations;
      agree += v.agrees ? 1 : 0;
    }
  }
  const double modes = static_cast<double>(set.modes.size());
  std::printf("n = 3 polytrope, %ld points, %zu modes: %.1f ms per mode (best of %d), "
              "%.1f mismatch evaluations per mode, %d of %zu agree\n",
              points, set.modes.size(), 1e3 * best / modes, repeat,
              static_cast<double>(evaluations) / modes, agree, set.modes.size());
  return 0;
}
