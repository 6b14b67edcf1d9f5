#pragma once
// Shared by the benchmarks in tests/bench: summary of repeated wall-time measurements.
#include <algorithm>
#include <cstddef>
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

} // namespace radmode::bench
