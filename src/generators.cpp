#include "radmode/generators.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/json.hpp"
#include "radmode/version.hpp"

#include <boost/numeric/odeint.hpp>

#include <algorithm>
#include <array>
#include <cmath>
#include <string>
#include <utility>

namespace radmode {

namespace {

namespace odeint = boost::numeric::odeint;
using State = std::array<double, 2>;

constexpr double tolerance = 1e-13;
constexpr double surface_tolerance = 1e-14;
constexpr double series_start = 0.01;
constexpr double theta_switch = 0.5; ///< below this theta becomes the independent variable
constexpr double mesh_stretch = 0.5; ///< a in the mesh rule (generators.hpp)

std::string num(double x) { return JsonWriter::number(x); }

void require_range(bool ok, const std::string& what, double value, const std::string& range) {
  if (!ok)
    throw UsageError(what + " = " + num(value) + " is out of range; expected " + range);
}

double theta_pow(double theta, double n) { return std::pow(std::max(theta, 0.0), n); }

/// Series solution near the centre: (theta, theta').
State lane_emden_series(double x, double n) {
  const double x2 = x * x;
  const double c6 = n * (8 * n - 5) / 15120.0;
  return {1 - x2 / 6 + n * x2 * x2 / 120 - c6 * x2 * x2 * x2,
          -x / 3 + n * x2 * x / 30 - 6 * c6 * x2 * x2 * x};
}

// Copying odeint's stepper copies its (still unused, uninitialized) std::array scratch
// buffers, which GCC reports as -Wuninitialized inside these functions; the copy is harmless.
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wuninitialized"
#pragma GCC diagnostic ignored "-Wmaybe-uninitialized"
#endif
/// For theta(x): smooth right-hand side, high order pays.
auto make_x_stepper() {
  return odeint::make_controlled(tolerance, tolerance,
                                 odeint::runge_kutta_fehlberg78<State>());
}
/// For (x, theta')(theta) near the surface: the right-hand side contains theta^n of the
/// independent variable, a quadrature-like, non-smooth term at theta = 0 for which the
/// Fehlberg 7(8) error estimate is unreliable (it returned theta'(x1) wrong by 6e-8 for
/// n = 0.5); Dormand-Prince 5(4) estimates it correctly.
auto make_theta_stepper() {
  return odeint::make_controlled(surface_tolerance, surface_tolerance,
                                 odeint::runge_kutta_dopri5<State>());
}
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic pop
#endif

} // namespace

void GeneratorOptions::validate() const {
  require_range(std::isfinite(mass_msun) && mass_msun >= 1e-3 && mass_msun <= 1e4,
                "mass (--mass, mass_msun)", mass_msun, "1e-3 <= M/M_sun <= 1e4");
  require_range(std::isfinite(radius_rsun) && radius_rsun >= 1e-6 && radius_rsun <= 1e5,
                "radius (--radius, radius_rsun)", radius_rsun, "1e-6 <= R/R_sun <= 1e5");
  if (points < StellarModel::min_points || points > 10000000)
    throw UsageError("number of points (--points) = " + std::to_string(points) +
                     " is out of range; expected " + std::to_string(StellarModel::min_points) +
                     " <= points <= 10000000");
  require_range(std::isfinite(gamma1) && gamma1 > 1 && gamma1 <= 10, "Gamma1 (--gamma1)", gamma1,
                "1 < Gamma1 <= 10");
  require_range(std::isfinite(mu) && mu >= 0.2 && mu <= 4, "mean molecular weight (--mu)", mu,
                "0.2 <= mu <= 4");
}

std::vector<double> stretched_mesh(std::size_t points) {
  if (points < 2) throw UsageError("a mesh needs at least 2 points");
  std::vector<double> q(points);
  const double last = static_cast<double>(points - 1);
  for (std::size_t i = 0; i < points; ++i) {
    const double s = static_cast<double>(i) / last;
    q[i] = s - mesh_stretch / (2 * constants::pi) * std::sin(2 * constants::pi * s);
  }
  q.front() = 0.0;
  q.back() = 1.0;
  return q;
}

LaneEmdenSolution solve_lane_emden(double n, const std::vector<double>& q) {
  require_range(std::isfinite(n) && n >= 0 && n <= max_polytrope_index,
                "polytropic index (--index)", n, "0 <= n <= " + num(max_polytrope_index));
  for (std::size_t i = 0; i < q.size(); ++i) {
    if (!(q[i] >= 0 && q[i] <= 1) || (i > 0 && q[i] < q[i - 1]))
      throw UsageError("Lane-Emden mesh: q[" + std::to_string(i) + "] = " + num(q[i]) +
                       "; expected non-decreasing values in [0, 1]");
  }

  // theta as a function of x.
  const auto in_x = [n](const State& s, State& ds, double x) {
    ds[0] = s[1];
    ds[1] = -2 * s[1] / x - theta_pow(s[0], n);
  };
  // (x, theta') as functions of theta.
  const auto in_theta = [n](const State& s, State& ds, double theta) {
    ds[0] = 1 / s[1];
    ds[1] = -2 / s[0] - theta_pow(theta, n) / s[1];
  };

  // Phase 1: in x until theta_switch/4 < theta <= theta_switch.
  auto stepper = make_x_stepper();
  State s = lane_emden_series(series_start, n);
  double x = series_start;
  double dx = 0.01;
  for (long iter = 0; s[0] > theta_switch; ++iter) {
    if (iter > 10000000 || !std::isfinite(s[0]) || x > 1e6)
      throw Error(ErrorKind::numerical,
                  "Lane-Emden integration for n = " + num(n) + " did not reach theta = 0.5");
    const State saved = s;
    const double saved_x = x;
    if (stepper.try_step(in_x, s, x, dx) != odeint::success) continue;
    if (s[0] <= theta_switch / 4) { // stepped too far: retry shorter
      const double taken = x - saved_x;
      s = saved;
      x = saved_x;
      dx = taken / 4;
    }
  }

  // Phase 2: in theta from the current theta down to 0.
  State y{x, s[1]};
  if (!(s[1] < 0))
    throw Error(ErrorKind::numerical, "Lane-Emden: theta' >= 0 before the surface, n = " + num(n));
  odeint::integrate_adaptive(make_theta_stepper(), in_theta, y, s[0], 0.0, -1e-3);

  LaneEmdenSolution out;
  out.n = n;
  out.x1 = y[0];
  out.dtheta_x1 = y[1];
  out.mass_constant = -out.x1 * out.x1 * out.dtheta_x1;
  out.central_condensation = -out.x1 / (3 * out.dtheta_x1);
  if (!(std::isfinite(out.x1) && std::isfinite(out.dtheta_x1) && out.dtheta_x1 < 0))
    throw Error(ErrorKind::numerical, "Lane-Emden: no regular surface found for n = " + num(n));

  // Profile at the requested points: the series inside x0, the controlled stepper (which
  // lands exactly on each requested x) beyond, the exact surface values at x1.
  out.x.resize(q.size());
  out.theta.resize(q.size());
  out.dtheta.resize(q.size());
  State p = lane_emden_series(series_start, n);
  double xp = series_start;
  auto profile_stepper = make_x_stepper();
  for (std::size_t i = 0; i < q.size(); ++i) {
    const double xi = q[i] * out.x1;
    out.x[i] = xi;
    State v;
    if (q[i] == 1.0) {
      v = {0.0, out.dtheta_x1};
    } else if (xi <= series_start) {
      v = lane_emden_series(xi, n);
    } else {
      if (xi > xp) {
        odeint::integrate_adaptive(profile_stepper, in_x, p, xp, xi, std::min(0.01, xi - xp));
        xp = xi;
      }
      v = p;
    }
    if (!(std::isfinite(v[0]) && std::isfinite(v[1])))
      throw Error(ErrorKind::numerical, "Lane-Emden: non-finite theta at x = " + num(xi));
    out.theta[i] = std::max(v[0], 0.0);
    out.dtheta[i] = v[1];
  }
  return out;
}

namespace {

StellarModel polytrope_model(const LaneEmdenSolution& le, const GeneratorOptions& o) {
  const double M = o.mass_msun * constants::M_sun;
  const double R = o.radius_rsun * constants::R_sun;
  const double n = le.n;
  const double rho_bar = 3 * M / (4 * constants::pi * R * R * R);
  const double rho_c = le.central_condensation * rho_bar;
  const double P_c = constants::G * M * M /
                     (4 * constants::pi * (n + 1) * le.dtheta_x1 * le.dtheta_x1 * R * R * R * R);
  const double x1sq_dtheta = le.x1 * le.x1 * le.dtheta_x1;

  StellarModel model;
  const std::size_t N = le.x.size();
  model.r.resize(N);
  model.m.resize(N);
  model.P.resize(N);
  model.rho.resize(N);
  model.gamma1.assign(N, o.gamma1);
  for (std::size_t i = 0; i < N; ++i) {
    const double q = le.x[i] / le.x1;
    model.r[i] = i + 1 == N ? R : q * R;
    model.m[i] = i == 0 ? 0.0 : (i + 1 == N ? M : M * le.x[i] * le.x[i] * le.dtheta[i] / x1sq_dtheta);
    model.rho[i] = rho_c * theta_pow(le.theta[i], n);
    model.P[i] = P_c * theta_pow(le.theta[i], n + 1);
  }
  // Near the surface m(r) changes by less than the integration error (1e-13 relative), so the
  // computed m may wobble by round-off; keep it non-decreasing and <= M, refusing anything
  // larger than round-off.
  for (std::size_t i = 1; i < N; ++i) {
    const double fixed = std::min(std::max(model.m[i], model.m[i - 1]), M);
    if (std::abs(fixed - model.m[i]) > 1e-10 * M)
      throw Error(ErrorKind::numerical, "polytrope n = " + num(n) +
                                            ": mass profile not monotonic beyond round-off");
    model.m[i] = fixed;
  }
  model.metadata = {
      {"n", num(n)},
      {"x1", num(le.x1)},
      {"mass_constant", num(le.mass_constant)},
      {"rhoc_over_rhobar", num(le.central_condensation)},
      {"rho_c", num(rho_c)},
      {"P_c", num(P_c)},
  };
  return model;
}

void add_common_metadata(StellarModel& model, const std::string& generator,
                         const std::string& description, const GeneratorOptions& o) {
  std::vector<std::pair<std::string, std::string>> head = {
      {"generator", generator},
      {"description", description},
      {"radmode_version", version},
      {"mass_msun", num(o.mass_msun)},
      {"radius_rsun", num(o.radius_rsun)},
      {"points", std::to_string(o.points)},
      {"mesh", "r/R = s - sin(2 pi s)/(4 pi), s uniform"},
      {"units", "cgs"},
  };
  head.insert(head.end(), model.metadata.begin(), model.metadata.end());
  model.metadata = std::move(head);
  model.source = "generated: " + description;
}

std::string mass_radius_text(const GeneratorOptions& o) {
  return num(o.mass_msun) + " M_sun, " + num(o.radius_rsun) + " R_sun, " +
         std::to_string(o.points) + " points";
}

} // namespace

StellarModel make_polytrope(double n, const GeneratorOptions& options) {
  options.validate();
  const LaneEmdenSolution le = solve_lane_emden(n, stretched_mesh(options.points));
  StellarModel model = polytrope_model(le, options);
  model.metadata.insert(model.metadata.begin() + 1, {"gamma1", num(options.gamma1)});
  add_common_metadata(model, "polytrope",
                      "polytrope of index n = " + num(n) + " (Lane-Emden), Gamma1 = " +
                          num(options.gamma1) + ", " + mass_radius_text(options),
                      options);
  validate_model(model);
  return model;
}

StellarModel make_uniform(const GeneratorOptions& options) {
  options.validate();
  const double M = options.mass_msun * constants::M_sun;
  const double R = options.radius_rsun * constants::R_sun;
  const double rho_bar = 3 * M / (4 * constants::pi * R * R * R);
  const double P_c = 2 * constants::pi / 3 * constants::G * rho_bar * rho_bar * R * R;
  const std::vector<double> q = stretched_mesh(options.points);
  StellarModel model;
  const std::size_t N = q.size();
  model.r.resize(N);
  model.m.resize(N);
  model.P.resize(N);
  model.rho.assign(N, rho_bar);
  model.gamma1.assign(N, options.gamma1);
  for (std::size_t i = 0; i < N; ++i) {
    model.r[i] = i + 1 == N ? R : q[i] * R;
    model.m[i] = i + 1 == N ? M : M * q[i] * q[i] * q[i];
    model.P[i] = i + 1 == N ? 0.0 : P_c * (1 - q[i] * q[i]);
  }
  model.metadata = {{"n", "0"},
                    {"gamma1", num(options.gamma1)},
                    {"rho_c", num(rho_bar)},
                    {"P_c", num(P_c)}};
  add_common_metadata(model, "uniform",
                      "uniform-density sphere (analytic), Gamma1 = " + num(options.gamma1) +
                          ", " + mass_radius_text(options),
                      options);
  validate_model(model);
  return model;
}

double eddington_quartic_coefficient() {
  namespace c = constants;
  const double w = solve_lane_emden(3.0).mass_constant;
  const double mu_k = c::atomic_mass_unit_g / c::boltzmann_k; // m_u / k
  return c::radiation_a * c::pi * std::pow(c::G, 3) * c::M_sun * c::M_sun * std::pow(mu_k, 4) /
         (48 * w * w);
}

double eddington_beta(double mass_msun, double mu) {
  require_range(std::isfinite(mass_msun) && mass_msun > 0, "mass (--mass, mass_msun)", mass_msun,
                "M > 0");
  require_range(std::isfinite(mu) && mu > 0, "mean molecular weight (--mu)", mu, "mu > 0");
  const double c = eddington_quartic_coefficient() * mass_msun * mass_msun * std::pow(mu, 4);
  const auto f = [c](double b) { return c * b * b * b * b + b - 1; };
  double lo = 0, hi = 1; // f(lo) < 0 <= f(hi)
  for (int i = 0; i < 200 && hi - lo > 0; ++i) {
    const double mid = 0.5 * (lo + hi);
    if (mid <= lo || mid >= hi) break;
    (f(mid) < 0 ? lo : hi) = mid;
  }
  return hi;
}

double gamma1_gas_radiation(double beta) {
  return (32 - 24 * beta - 3 * beta * beta) / (24 - 21 * beta);
}

double nabla_ad_gas_radiation(double beta) {
  return 2 * (4 - 3 * beta) / (32 - 24 * beta - 3 * beta * beta);
}

StellarModel make_standard_model(const GeneratorOptions& options) {
  options.validate();
  const double beta = eddington_beta(options.mass_msun, options.mu);
  const double g1 = gamma1_gas_radiation(beta);
  const LaneEmdenSolution le = solve_lane_emden(3.0, stretched_mesh(options.points));
  GeneratorOptions o = options;
  o.gamma1 = g1;
  StellarModel model = polytrope_model(le, o);

  const double rho_c = model.rho.front();
  const double P_c = model.P.front();
  const double P_over_rho_c = P_c / rho_c;
  const double T_c = beta * options.mu * constants::atomic_mass_unit_g * P_over_rho_c /
                     constants::boltzmann_k;
  const double u_factor = 1.5 * beta + 3 * (1 - beta);
  const std::size_t N = model.size();
  model.T.resize(N);
  model.u.resize(N);
  model.nabla_ad.assign(N, nabla_ad_gas_radiation(beta));
  for (std::size_t i = 0; i < N; ++i) {
    model.T[i] = T_c * le.theta[i];
    model.u[i] = u_factor * P_over_rho_c * le.theta[i];
  }
  model.metadata.insert(model.metadata.begin() + 1,
                        {{"gamma1", num(g1)},
                         {"beta", num(beta)},
                         {"mu", num(options.mu)},
                         {"quartic_coefficient", num(eddington_quartic_coefficient())},
                         {"nabla_ad", num(nabla_ad_gas_radiation(beta))}});
  model.metadata.push_back({"T_c", num(T_c)});
  add_common_metadata(model, "standard",
                      "Eddington standard model (n = 3, beta = " + num(beta) +
                          ", mu = " + num(options.mu) + "), " + mass_radius_text(options),
                      options);
  validate_model(model);
  return model;
}

} // namespace radmode
