#include "analytic_models.hpp"

#include "radmode/constants.hpp"

namespace radmode::test {

StellarModel uniform_sphere(const std::vector<double>& x, double gamma1, double mass_g,
                            double radius_cm) {
  using constants::G;
  using constants::pi;
  StellarModel m;
  const double rho = 3.0 * mass_g / (4.0 * pi * radius_cm * radius_cm * radius_cm);
  const double Pc = (2.0 * pi / 3.0) * G * rho * rho * radius_cm * radius_cm;
  for (const double xi : x) {
    m.r.push_back(xi * radius_cm);
    m.m.push_back(mass_g * xi * xi * xi);
    m.P.push_back(Pc * (1.0 - xi * xi));
    m.rho.push_back(rho);
    m.gamma1.push_back(gamma1);
  }
  m.source = "uniform-density sphere (built in the test)";
  return m;
}

std::vector<double> uniform_mesh(std::size_t n_intervals, double x0) {
  std::vector<double> x(n_intervals + 1);
  for (std::size_t i = 0; i <= n_intervals; ++i)
    x[i] = x0 + (1.0 - x0) * static_cast<double>(i) / static_cast<double>(n_intervals);
  x.back() = 1.0;
  return x;
}

TridiagonalPencil model_pencil(const StellarModel& model) {
  const Structure s(model);
  const WeakForm f = make_stellar_form(s, SurfaceCondition::regular);
  return assemble(f, {all_nodes(f), false, false});
}

} // namespace radmode::test
