#include "diag_models.hpp"

#include "radmode/constants.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <stdexcept>
#include <vector>

namespace radmode::test {

namespace {
using constants::G;
using constants::pi;

StellarModel empty_model(std::size_t points, const char* what) {
  if (points < 3) throw std::invalid_argument("test model needs at least 3 points");
  StellarModel m;
  for (auto* v : {&m.r, &m.m, &m.P, &m.rho, &m.gamma1}) v->resize(points);
  m.source = what;
  return m;
}
} // namespace

StellarModel polytrope_model(double n, std::size_t points, double mass_g, double radius_cm,
                             double gamma1) {
  if (!(n > 0.0 && n < 5.0)) throw std::invalid_argument("polytrope_model: 0 < n < 5");
  // y = (theta, theta'); theta'' = -theta^n - 2 theta'/x. Series start at x0.
  using State = std::array<double, 2>;
  auto rhs = [n](double x, const State& y) {
    return State{y[1], -std::pow(std::max(y[0], 0.0), n) - 2.0 * y[1] / x};
  };
  const double h = 1e-4;
  double x = 1e-3;
  State y{1.0 - x * x / 6.0 + n * std::pow(x, 4) / 120.0, -x / 3.0 + n * std::pow(x, 3) / 30.0};
  std::vector<double> xs{0.0, x}, th{1.0, y[0]}, dth{0.0, y[1]};
  while (y[0] > 0.0) {
    auto add = [](const State& a, const State& b, double s) {
      return State{a[0] + s * b[0], a[1] + s * b[1]};
    };
    const State k1 = rhs(x, y);
    const State k2 = rhs(x + h / 2, add(y, k1, h / 2));
    const State k3 = rhs(x + h / 2, add(y, k2, h / 2));
    const State k4 = rhs(x + h, add(y, k3, h));
    for (std::size_t c = 0; c < 2; ++c) y[c] += h / 6 * (k1[c] + 2 * k2[c] + 2 * k3[c] + k4[c]);
    x += h;
    xs.push_back(x);
    th.push_back(y[0]);
    dth.push_back(y[1]);
    if (x > 50) throw std::runtime_error("polytrope_model: no surface found");
  }
  // Surface: Newton on the cubic Hermite interpolant of the last step.
  const std::size_t k = xs.size() - 2;
  auto hermite = [&](std::size_t j, double xx, double& f, double& df) {
    const double hh = xs[j + 1] - xs[j], t = (xx - xs[j]) / hh;
    const double t2 = t * t, t3 = t2 * t;
    f = (2 * t3 - 3 * t2 + 1) * th[j] + (t3 - 2 * t2 + t) * hh * dth[j] +
        (-2 * t3 + 3 * t2) * th[j + 1] + (t3 - t2) * hh * dth[j + 1];
    df = ((6 * t2 - 6 * t) * th[j] + (3 * t2 - 4 * t + 1) * hh * dth[j] +
          (-6 * t2 + 6 * t) * th[j + 1] + (3 * t2 - 2 * t) * hh * dth[j + 1]) /
         hh;
  };
  double x1 = xs[k] - th[k] / dth[k];
  for (int it = 0; it < 50; ++it) {
    double f, df;
    hermite(k, x1, f, df);
    x1 -= f / df;
  }
  double t1, dtheta1;
  hermite(k, x1, t1, dtheta1);

  StellarModel m = empty_model(points, "test polytrope");
  const double rho_mean = 3.0 * mass_g / (4.0 * pi * std::pow(radius_cm, 3));
  const double rho_c = rho_mean * (-x1 / (3.0 * dtheta1));
  const double pc = G * mass_g * mass_g / (4.0 * pi * (n + 1.0) * dtheta1 * dtheta1 *
                                           std::pow(radius_cm, 4));
  for (std::size_t i = 0; i < points; ++i) {
    const double q = static_cast<double>(i) / static_cast<double>(points - 1);
    const double xx = q * x1;
    double f = 1.0, df = 0.0;
    if (i + 1 == points) {
      f = 0.0;
      df = dtheta1;
    } else if (i > 0) {
      const auto it = std::upper_bound(xs.begin(), xs.end(), xx);
      const auto j = static_cast<std::size_t>(it - xs.begin()) - 1;
      hermite(std::min(j, xs.size() - 2), xx, f, df);
      f = std::max(f, 0.0);
    }
    m.r[i] = q * radius_cm;
    m.m[i] = mass_g * xx * xx * df / (x1 * x1 * dtheta1);
    m.rho[i] = rho_c * std::pow(f, n);
    m.P[i] = pc * std::pow(f, n + 1.0);
    m.gamma1[i] = gamma1;
  }
  m.r.back() = radius_cm;
  m.m.back() = mass_g;
  return m;
}

} // namespace radmode::test
