#include "exp_function.hpp"

#include <cmath>
#include <cstring>
#include <initializer_list>
#include <limits>

#if defined(__GLIBC__) && defined(__x86_64__)
#include <dlfcn.h>
#endif

namespace radmode::detail {

namespace {

double library_exp(double x) { return std::exp(x); }

bool same_bits(double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; }

ExpFunction resolve() {
#if defined(__GLIBC__) && defined(__x86_64__)
  // GNU libc's exp is a wrapper around its kernel (selected for the processor, e.g. with FMA)
  // that sets errno when the result overflows or underflows; the kernel alone is exported
  // under the old name __exp_finite (version GLIBC_2.15, kept for binaries built against
  // glibc before 2.31). Same kernel, so the same results; checked here on arguments across
  // the range, both ends and the special values before it is used.
  if (void* symbol = dlvsym(RTLD_DEFAULT, "__exp_finite", "GLIBC_2.15")) {
    ExpFunction kernel = nullptr;
    static_assert(sizeof kernel == sizeof symbol, "function and object pointers differ in size");
    std::memcpy(&kernel, &symbol, sizeof kernel);
    const double inf = std::numeric_limits<double>::infinity();
    bool agrees = true;
    for (const double x : {0.0, -0.0, 1.0, -1.0, 0.5, 1e-300, -1e-17, 3.7, -3.7, 40.25,
                           -40.25, 88.7, 700.0, 709.78, 709.79, -708.4, -745.1, -745.2, -800.0,
                           1e10, -1e10, inf, -inf, std::numeric_limits<double>::quiet_NaN()})
      agrees = agrees && (same_bits(kernel(x), std::exp(x)) || (std::isnan(x) && std::isnan(kernel(x))));
    for (int i = -2000; i <= 2000 && agrees; ++i) {
      const double x = 0.3537 * i + 1e-3 * (i % 7);
      agrees = same_bits(kernel(x), std::exp(x));
    }
    if (agrees) return kernel;
  }
#endif
  return &library_exp;
}

} // namespace

ExpFunction exp_function() {
  static const ExpFunction f = resolve();
  return f;
}

} // namespace radmode::detail
