// Tests of include/radmode/modes.hpp: unit conversions, the pulsation constant, and the
// eigenfunction by-products (inertia, weight function, Gamma1 kernel, delta P/P) on the
// analytic radial modes of the uniform-density sphere, built by hand (no solver involved).
#include "radmode/modes.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/json.hpp"

#include "analytic_models.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <sstream>
#include <string>
#include <vector>

using namespace radmode;
using constants::G;
using constants::pi;

namespace {

constexpr double kMass = 2.0e33;  // g (an invented star)
constexpr double kRadius = 3.0e11; // cm

/// Uniform-density sphere (tests/support/analytic_models.hpp) on a non-uniform mesh, denser
/// towards the surface (x = sin(pi t/2)), so the node derivative is really tested.
StellarModel uniform_sphere(std::size_t n, double gamma1) {
  std::vector<double> x;
  for (std::size_t i = 0; i < n; ++i)
    x.push_back(std::sin(0.5 * pi * static_cast<double>(i) / static_cast<double>(n - 1)));
  x.back() = 1.0;
  return test::uniform_sphere(x, gamma1, kMass, kRadius);
}

double unit_omega2() { return G * kMass / (kRadius * kRadius * kRadius); }

/// Sterne (1937) closed form for the uniform sphere: sigma_k^2 = Gamma1 (k+1)(2k+3) - 4
/// (physics.md section 7). F: xi = const; 1O: xi proportional to 1 - (7/5) x^2.
ModeSet analytic_modes(const StellarModel& model, double gamma1) {
  ModeSet set;
  set.node_r = model.r;
  ModeSolution f;
  f.order = 0;
  f.nodes = 0;
  f.order_agrees = true;
  f.omega2 = (3.0 * gamma1 - 4.0) * unit_omega2();
  f.error_estimate = 1e-9 * std::fabs(f.omega2);
  f.trusted = true;
  ModeSolution o1 = f;
  o1.order = 1;
  o1.nodes = 1;
  o1.omega2 = (10.0 * gamma1 - 4.0) * unit_omega2();
  for (double r : model.r) {
    const double x = r / kRadius;
    f.xi.push_back(1.0);
    o1.xi.push_back(3.0 * (1.0 - 1.4 * x * x)); // deliberately not normalized to xi(R) = 1
  }
  set.modes = {f, o1};
  return set;
}

double trapezoid(const std::vector<double>& x, const std::vector<double>& y) {
  double s = 0;
  for (std::size_t i = 0; i + 1 < x.size(); ++i) s += 0.5 * (x[i + 1] - x[i]) * (y[i] + y[i + 1]);
  return s;
}

} // namespace

TEST_CASE("mode labels follow the trade convention F, 1O, 2O") {
  // Common practice: fundamental F, first overtone 1O, ...
  CHECK(mode_label(0) == "F");
  CHECK(mode_label(1) == "1O");
  CHECK(mode_label(2) == "2O");
  CHECK(mode_label(12) == "12O");
  CHECK(mode_label(-1) == "?");
}

TEST_CASE("pulsation constant: Q = 0.115836 d / sigma (physics.md section 2)") {
  // For any M, R: Pi = 2 pi t_K / sigma, and Q sigma = 2 pi (R_sun^3/GM_sun)^(1/2) / 1 d,
  // 0.115836 d with the IAU 2015 nominal values (physics.md; also 0.1158359 from astropy's
  // GM_sun and R_sun evaluated by hand).
  for (const double sigma : {0.5, 1.0, 3.7}) {
    for (const double mass : {0.3 * constants::M_sun, 2.0e33, 10.0 * constants::M_sun}) {
      const double radius = 2.5e11;
      const double tK = std::sqrt(radius * radius * radius / (G * mass));
      const double period = 2.0 * pi * tK / sigma;
      CHECK(pulsation_constant_d(period, mass, radius) * sigma ==
            doctest::Approx(0.115836).epsilon(5e-6));
    }
  }
  // The Sun itself: M = M_sun, R = R_sun gives Q = Pi in days.
  CHECK(pulsation_constant_d(86400.0, constants::M_sun, constants::R_sun) ==
        doctest::Approx(1.0).epsilon(1e-14));
}

TEST_CASE("model scales of the Sun: t_dyn about an hour, t_K = 1593 s") {
  // physics.md section 2 table: t_dyn = 3260 s, t_K = 1593 s for the nominal Sun.
  StellarModel sun = uniform_sphere(20, 5.0 / 3.0);
  for (auto& r : sun.r) r *= constants::R_sun / kRadius;
  for (auto& m : sun.m) m *= constants::M_sun / kMass;
  const ModelScales s = model_scales(sun);
  CHECK(s.t_dyn_s == doctest::Approx(3260.0).epsilon(1e-3));
  CHECK(s.t_kepler_s == doctest::Approx(1593.0).epsilon(1e-3));
  CHECK(s.mean_density == doctest::Approx(1.41).epsilon(3e-3)); // Sun: 1.41 g/cm^3 (common practice)
}

TEST_CASE("unit conversions of an oscillatory mode") {
  // A one-hour period: omega = 2 pi / 3600 s. By hand: 1e6/3600 = 277.777... microHz,
  // 86400/3600 = 24 cycles per day, 1/24 d.
  const StellarModel model = uniform_sphere(50, 5.0 / 3.0);
  ModeSet set = analytic_modes(model, 5.0 / 3.0);
  set.modes.resize(1);
  const double omega = 2.0 * pi / 3600.0;
  set.modes[0].omega2 = omega * omega;
  set.modes[0].error_estimate = 1e-6 * omega * omega;
  const ModeReport rep = make_mode_report(model, set, SolveOptions{});
  REQUIRE(rep.modes.size() == 1);
  const ModeQuantities& q = rep.modes[0];
  REQUIRE(q.period_s);
  CHECK(*q.period_s == doctest::Approx(3600.0).epsilon(1e-13));
  CHECK(*q.period_h == doctest::Approx(1.0).epsilon(1e-13));
  CHECK(*q.period_d == doctest::Approx(1.0 / 24.0).epsilon(1e-13));
  CHECK(*q.frequency_uHz == doctest::Approx(1e6 / 3600.0).epsilon(1e-13));
  CHECK(*q.frequency_cd == doctest::Approx(24.0).epsilon(1e-13));
  // microHz <-> c/d: 1 c/d = 1e6/86400 microHz = 11.574074 microHz.
  CHECK(*q.frequency_uHz / *q.frequency_cd == doctest::Approx(11.574074074).epsilon(1e-10));
  CHECK(q.sigma2 == doctest::Approx(omega * omega / unit_omega2()).epsilon(1e-13));
  const double t_dyn = model_scales(model).t_dyn_s;
  CHECK(*q.omega_t_dyn == doctest::Approx(omega * t_dyn).epsilon(1e-13));
  CHECK(*q.Q_d == doctest::Approx(0.115836 / std::sqrt(q.sigma2)).epsilon(5e-6));
  CHECK(*q.error_estimate_rel == doctest::Approx(1e-6));
  CHECK(q.stable);
  CHECK_FALSE(q.sign_uncertain);
  CHECK_FALSE(q.growth_rate_s);
  CHECK_FALSE(q.growth_time_s);
  CHECK_FALSE(q.growth_time_t_dyn);
}

TEST_CASE("growing mode: growth rate, e-folding time, no period") {
  // physics.md section 1: omega^2 < 0 grows as exp(eta t), eta = (-omega^2)^(1/2), tau = 1/eta.
  const StellarModel model = uniform_sphere(50, 1.2);
  ModeSet set = analytic_modes(model, 1.2);
  set.modes.resize(1);
  set.modes[0].omega2 = -4.0e-6; // eta = 2e-3 /s, tau = 500 s
  set.modes[0].error_estimate = 1e-12;
  const ModeReport rep = make_mode_report(model, set, SolveOptions{});
  const ModeQuantities& q = rep.modes[0];
  CHECK_FALSE(q.stable);
  REQUIRE(q.growth_rate_s);
  CHECK(*q.growth_rate_s == doctest::Approx(2.0e-3).epsilon(1e-14));
  CHECK(*q.growth_time_s == doctest::Approx(500.0).epsilon(1e-14));
  CHECK(*q.growth_time_t_dyn == doctest::Approx(500.0 / model_scales(model).t_dyn_s));
  CHECK_FALSE(q.period_s);
  CHECK_FALSE(q.period_d);
  CHECK_FALSE(q.frequency_uHz);
  CHECK_FALSE(q.frequency_cd);
  CHECK_FALSE(q.Q_d);
  CHECK_FALSE(q.omega_t_dyn);
  CHECK(rep.period_ratio_note.find("no established period") != std::string::npos);
  CHECK(rep.period_ratios.empty());

  // JSON: absent values are null, nothing is NaN.
  std::ostringstream out;
  JsonWriter json(out);
  write_mode_json(json, q);
  const std::string text = out.str();
  CHECK(text.find("\"period_s\": null") != std::string::npos);
  CHECK(text.find("\"growth_time_s\": 500") != std::string::npos);
  CHECK(text.find("nan") == std::string::npos);
  CHECK(text.find("inf") == std::string::npos);
  // CSV: empty fields for absent values, same number of columns as the header.
  const std::string row = mode_csv_row(q);
  const auto commas = [](const std::string& s) { return std::count(s.begin(), s.end(), ','); };
  CHECK(commas(row) == commas(mode_csv_header()));
  CHECK(row.find("nan") == std::string::npos);
}

TEST_CASE("a mode whose |omega^2| is below its error estimate has an uncertain sign") {
  const StellarModel model = uniform_sphere(50, 4.0 / 3.0);
  ModeSet set = analytic_modes(model, 4.0 / 3.0); // Gamma1 = 4/3: omega_0^2 = 0 exactly
  set.modes.resize(1);
  set.modes[0].omega2 = 1e-3 * unit_omega2();
  set.modes[0].error_estimate = 2e-3 * unit_omega2();
  const ModeReport rep = make_mode_report(model, set, SolveOptions{});
  CHECK(rep.modes[0].sign_uncertain);
  // No period (it might as well grow) and no growth time (it might as well oscillate).
  CHECK_FALSE(rep.modes[0].period_s);
  CHECK_FALSE(rep.modes[0].frequency_uHz);
  CHECK_FALSE(rep.modes[0].growth_rate_s);
  CHECK(rep.period_ratios.empty());
}

TEST_CASE("without extrapolation there is no relative error estimate") {
  // The solver's estimate is then its residual alone, not the discretization error.
  const StellarModel model = uniform_sphere(50, 5.0 / 3.0);
  SolveOptions no_extrapolation;
  no_extrapolation.richardson = false;
  const ModeReport rep =
      make_mode_report(model, analytic_modes(model, 5.0 / 3.0), no_extrapolation);
  CHECK_FALSE(rep.modes[0].error_estimate_rel);
  CHECK(rep.modes[0].period_s);
}

TEST_CASE("uniform sphere, analytic F and 1O: inertia, weight function, Gamma1 kernel") {
  // Sterne 1937 (physics.md section 7): sigma_0^2 = 3 Gamma1 - 4 with xi = const,
  // sigma_1^2 = 10 Gamma1 - 4 with xi proportional to 1 - (7/5) x^2.
  const double gamma1 = 5.0 / 3.0;
  const StellarModel model = uniform_sphere(801, gamma1);
  const ModeSet set = analytic_modes(model, gamma1);
  const ModeReport rep = make_mode_report(model, set, SolveOptions{});
  REQUIRE(rep.modes.size() == 2);
  REQUIRE(rep.profiles.size() == 2);

  const double sigma2[2] = {3.0 * gamma1 - 4.0, 10.0 * gamma1 - 4.0};
  // Inertia E = int xi^2 r^2 dm/(M R^2 xi(R)^2) with dm = 3 M x^2 dx, by hand:
  // F: int 3 x^4 dx = 3/5; 1O: 3 int x^4 (1 - 1.4x^2)^2 dx / 0.16 = 3 (4/225)/0.16 = 1/3.
  const double inertia[2] = {0.6, 1.0 / 3.0};
  // Gamma1 sensitivity at fixed structure: d sigma_k^2/d Gamma1 = (k+1)(2k+3) = 3, 10.
  const double dsigma2_dgamma1[2] = {3.0, 10.0};
  for (int k = 0; k < 2; ++k) {
    CAPTURE(k);
    const ModeQuantities& q = rep.modes[static_cast<std::size_t>(k)];
    const ModeProfile& p = rep.profiles[static_cast<std::size_t>(k)];
    CHECK(q.sigma2 == doctest::Approx(sigma2[k]).epsilon(1e-12));
    REQUIRE(q.inertia);
    CHECK(*q.inertia == doctest::Approx(inertia[k]).epsilon(1e-5));
    // Rayleigh quotient of the eigenfunction (= int w dr; P_s = 0 so no surface term).
    REQUIRE(q.omega2_rayleigh_s2);
    CHECK(*q.omega2_rayleigh_s2 / unit_omega2() == doctest::Approx(sigma2[k]).epsilon(2e-5));
    // The same from the node values of the profile (trapezoid in r/R).
    CHECK(trapezoid(p.r_over_R, p.weight) == doctest::Approx(sigma2[k]).epsilon(1e-4));
    CHECK(trapezoid(p.r_over_R, p.gamma1_kernel) ==
          doctest::Approx(dsigma2_dgamma1[k]).epsilon(1e-4));
    // Normalization and coordinates.
    CHECK(p.xi.back() == doctest::Approx(1.0));
    CHECK(p.r_over_R.back() == doctest::Approx(1.0));
    CHECK(p.m_over_M.back() == doctest::Approx(1.0));
    CHECK(p.m_over_M.front() == 0.0);
    CHECK(p.dT_T.empty()); // the model has no nabla_ad
  }
  // F: xi = 1, delta rho/rho = -3, delta P/P = -3 Gamma1 everywhere.
  for (std::size_t i = 0; i < rep.profiles[0].xi.size(); ++i) {
    CHECK(rep.profiles[0].drho_rho[i] == doctest::Approx(-3.0));
    CHECK(rep.profiles[0].dP_P[i] == doctest::Approx(-3.0 * gamma1));
  }
  // 1O normalized: xi = (1 - 1.4x^2)/(-0.4); 3 xi + r xi' = -7.5 + 17.5 x^2 exactly, which
  // the three-point node derivative reproduces at interior nodes (exact for quadratics).
  const ModeProfile& p1 = rep.profiles[1];
  for (std::size_t i = 1; i + 1 < p1.xi.size(); ++i) {
    const double x = p1.r_over_R[i];
    CHECK(p1.xi[i] == doctest::Approx((1.0 - 1.4 * x * x) / -0.4));
    CHECK(p1.drho_rho[i] == doctest::Approx(7.5 - 17.5 * x * x).epsilon(1e-9));
  }
  // Ends: the one-sided three-node derivative is exact for this quadratic xi. Surface:
  // regular condition p = -(4 + sigma^2) xi = -10 Gamma1; centre: 3 xi + r xi' = 3 xi.
  CHECK(p1.dP_P.back() == doctest::Approx(-10.0 * gamma1).epsilon(1e-9));
  CHECK(p1.drho_rho.front() == doctest::Approx(7.5).epsilon(1e-12));
  REQUIRE(p1.surface_dP_P_condition);
  CHECK(*p1.surface_dP_P_condition == doctest::Approx(p1.dP_P.back()).epsilon(1e-9));
  // Node at r/R = (5/7)^(1/2) (physics.md section 7).
  for (std::size_t i = 0; i + 1 < p1.xi.size(); ++i)
    if ((p1.xi[i] < 0) != (p1.xi[i + 1] < 0))
      CHECK(p1.r_over_R[i] == doctest::Approx(std::sqrt(5.0 / 7.0)).epsilon(5e-3));

  // Period ratio P_1/P_0 = (sigma_0^2/sigma_1^2)^(1/2) = (1/(38/3))^(1/2) for Gamma1 = 5/3.
  REQUIRE(rep.period_ratios.size() == 1);
  CHECK(rep.period_ratios[0].order == 1);
  CHECK(rep.period_ratios[0].label == "1O");
  CHECK(rep.period_ratios[0].ratio == doctest::Approx(std::sqrt(3.0 / 38.0)).epsilon(1e-12));
}

TEST_CASE("weight function converges at second order in the mesh spacing") {
  // Linear elements: the Rayleigh-quotient error of the interpolated exact eigenfunction falls
  // as h^2 (physics.md section 4): halving h divides it by about 4.
  const double gamma1 = 5.0 / 3.0;
  double previous = 0;
  for (const std::size_t n : {101u, 201u, 401u}) {
    const StellarModel model = uniform_sphere(n, gamma1);
    const ModeReport rep = make_mode_report(model, analytic_modes(model, gamma1), SolveOptions{});
    const double err = std::fabs(*rep.modes[1].omega2_rayleigh_s2 / unit_omega2() - 38.0 / 3.0);
    if (previous > 0) CHECK(previous / err == doctest::Approx(4.0).epsilon(0.15));
    previous = err;
  }
}

TEST_CASE("surface terms: a truncated model with P_s > 0") {
  // With the regular surface condition K and M gain -4 R^3 P_s xi(R)^2 and R^6 P_s/(GM) xi(R)^2
  // (physics.md section 4); with the fixed-pressure condition they are absent. xi = const is
  // an exact homologous motion; for it K = 9 int (Gamma1 - 4/3) P r^2 dr + (surface terms).
  // Here we check the bookkeeping: the two conditions differ by exactly those terms.
  StellarModel model = uniform_sphere(401, 5.0 / 3.0);
  const std::size_t cut = 380;
  model.r.resize(cut);
  model.m.resize(cut);
  model.P.resize(cut);
  model.rho.resize(cut);
  model.gamma1.resize(cut);
  ModeSet set = analytic_modes(model, 5.0 / 3.0);
  set.modes.resize(1);
  SolveOptions regular;
  SolveOptions fixed;
  fixed.surface = SurfaceCondition::fixed_pressure;
  const ModeReport a = make_mode_report(model, set, regular);
  const ModeReport b = make_mode_report(model, set, fixed);
  const double R = model.radius();
  const double M = model.mass();
  const double Ps = model.surface_pressure();
  REQUIRE(Ps > 0);
  // Recover K and M of the fixed case from the inertia: M_fixed = E M R^2 / (4 pi).
  const double m_fixed = *b.modes[0].inertia * M * R * R / (4.0 * pi);
  const double k_fixed = *b.modes[0].omega2_rayleigh_s2 * m_fixed;
  const double m_reg = m_fixed + std::pow(R, 6) * Ps / (G * M);
  const double k_reg = k_fixed - 4.0 * R * R * R * Ps;
  CHECK(*a.modes[0].omega2_rayleigh_s2 == doctest::Approx(k_reg / m_reg).epsilon(1e-12));
  CHECK(*a.modes[0].inertia == doctest::Approx(*b.modes[0].inertia).epsilon(1e-14));
  CHECK(a.profiles[0].surface_dP_P_condition);
  CHECK_FALSE(b.profiles[0].surface_dP_P_condition); // only the regular condition prescribes it
}

TEST_CASE("delta T/T = nabla_ad delta P/P when the model gives nabla_ad") {
  StellarModel model = uniform_sphere(101, 5.0 / 3.0);
  model.nabla_ad.assign(model.size(), 0.4); // ideal monatomic gas: 2/5 (common practice)
  const ModeReport rep = make_mode_report(model, analytic_modes(model, 5.0 / 3.0), SolveOptions{});
  const ModeProfile& p = rep.profiles[1];
  REQUIRE(p.dT_T.size() == p.xi.size());
  for (std::size_t i = 0; i < p.xi.size(); ++i) CHECK(p.dT_T[i] == doctest::Approx(0.4 * p.dP_P[i]));
  const std::string text = format_profiles(rep, "m.txt");
  CHECK(text.find("order,label,r_over_R,m_over_M,xi,dP_P,drho_rho,dT_T,weight,gamma1_kernel\n") !=
        std::string::npos);
}

TEST_CASE("inconsistent mode set is reported, not read out of bounds") {
  const StellarModel model = uniform_sphere(50, 5.0 / 3.0);
  ModeSet set = analytic_modes(model, 5.0 / 3.0);
  set.modes[1].xi.pop_back();
  CHECK_THROWS_WITH_AS(make_mode_report(model, set, SolveOptions{}),
                       doctest::Contains("eigenfunction of order 1 has 49 values"), Error);
}
