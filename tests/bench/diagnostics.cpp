// Benchmark: diagnose() (diagnostics.hpp) and validate_model() (model.hpp) on generated
// models and on model tables. Built, not run by ctest:
//
//   build/tests/bench_diagnostics [REPETITIONS=500] [POINTS=2000] [TABLE...]
//
// Generates an n = 3 polytrope and an n = 1.5 polytrope of POINTS points (Gamma1 = 5/3), reads
// each TABLE (e.g. a model of a track written by `radmode make`), and prints the median, mean
// and minimum wall time and the mean CPU time per call (the machine is shared: the minimum and
// the CPU time are the figures to compare). Batch runs diagnose every model of a track, so one
// call on a 2,000-point model should cost a small fraction of a millisecond.
#include "radmode/diagnostics.hpp"
#include "radmode/generators.hpp"
#include "radmode/model.hpp"
#include "radmode/model_io.hpp"
#include "timing.hpp"

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <string>
#include <vector>

namespace {


using radmode::bench::time_calls;
using Result = radmode::bench::Measured;

void report(const std::string& label, const Result& r) {
  std::printf("%-34s median %7.1f us, mean %7.1f us, min %7.1f us, cpu %7.1f us per call\n",
              label.c_str(), 1e6 * r.wall.median_s, 1e6 * r.wall.mean_s, 1e6 * r.wall.min_s,
              1e6 * r.cpu_s);
}

void report_model(const std::string& name, const radmode::StellarModel& model, int reps) {
  report("diagnose, " + name,
         time_calls([&] { return radmode::diagnose(model).hse_residual_max; }, reps));
}

} // namespace

int main(int argc, char** argv) {
  const int reps = argc > 1 ? std::atoi(argv[1]) : 500;
  const long points = argc > 2 ? std::atol(argv[2]) : 2000;
  if (reps <= 0 || points < 10) {
    std::fprintf(stderr, "usage: bench_diagnostics [REPETITIONS>0] [POINTS>=10] [TABLE...]\n");
    return 2;
  }
  radmode::GeneratorOptions g;
  g.points = static_cast<std::size_t>(points);
  const radmode::StellarModel n3 = radmode::make_polytrope(3.0, g);
  const radmode::StellarModel n15 = radmode::make_polytrope(1.5, g);
  std::printf("polytropes of %ld points; %d repetitions\n", points, reps);
  report_model("n = 3", n3, reps);
  report_model("n = 1.5", n15, reps);
  for (int i = 3; i < argc; ++i) report_model(argv[i], radmode::read_model(argv[i]), reps);
  report("validate_model, n = 3", time_calls(
                                      [&] {
                                        radmode::validate_model(n3);
                                        return 1.0;
                                      },
                                      reps));
  return 0;
}
