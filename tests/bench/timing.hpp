#pragma once
// Shared by the benchmarks in tests/bench: summary of repeated wall-time measurements.
#include <algorithm>
#include <chrono>
#include <cstddef>
#include <cstdio>
#include <ctime>
#include <vector>

namespace radmode::bench {

/// Median, mean and minimum of per-call times [s]. The machine may be shared: the median and
/// the minimum are the figures to compare between runs.
struct Timing {
  double median_s = 0, mean_s = 0, min_s = 0;
};

/// Summarizes the per-call times in `t` (reordered; must not be empty).
inline Timing summarize(std::vector<double>& t) {
  Timing out;
  for (double dt : t) out.mean_s += dt / static_cast<double>(t.size());
  out.min_s = *std::min_element(t.begin(), t.end());
  const auto mid = t.begin() + static_cast<std::ptrdiff_t>(t.size() / 2);
  std::nth_element(t.begin(), mid, t.end());
  out.median_s = *mid;
  return out;
}

/// Process CPU time [s] (std::clock; immune to other processes taking the core).
inline double cpu_seconds() { return static_cast<double>(std::clock()) / CLOCKS_PER_SEC; }

/// Wall-time summary and mean CPU time [s] per call.
struct Measured {
  Timing wall;
  double cpu_s = 0;
};

/// Times `reps` calls of call() (after one untimed call that builds any lazily initialised
/// tables); call returns a number, summed so that the work cannot be optimized away.
template <class Call> Measured time_calls(Call call, int reps) {
  double sink = static_cast<double>(call());
  std::vector<double> t(static_cast<std::size_t>(reps));
  const double cpu_start = cpu_seconds();
  for (auto& dt : t) {
    const auto start = std::chrono::steady_clock::now();
    sink += static_cast<double>(call());
    dt = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  }
  Measured m;
  m.cpu_s = (cpu_seconds() - cpu_start) / reps;
  if (sink == -1.0) std::puts("");
  m.wall = summarize(t);
  return m;
}

} // namespace radmode::bench
