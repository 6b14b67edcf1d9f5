#pragma once
// Internal helpers for the readable (text) writers of the core library: numbers with a fixed
// count of significant digits, never "nan"/"inf" (they read "n/a" / "infinite").
#include <cmath>
#include <cstdio>
#include <string>

namespace radmode::detail {

/// x with `digits` significant digits (%g style); "n/a" for NaN, "infinite" for +-inf.
inline std::string sig(double x, int digits = 4) {
  if (std::isnan(x)) return "n/a";
  if (std::isinf(x)) return x > 0 ? "infinite" : "-infinite";
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.*g", digits, x);
  return buf;
}

} // namespace radmode::detail
