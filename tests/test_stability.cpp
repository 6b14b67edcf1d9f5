// Dynamical-stability verdict (include/radmode/stability.hpp).
// Part 1: the verdict logic on exactly known fundamentals (uniform sphere, xi = const is the
// exact fundamental with omega0^2 = (3 Gamma1 - 4) G M / R^3 -- Sterne 1937, physics.md 7).
#include "radmode/stability.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/generators.hpp"
#include "analytic_models.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <sstream>

using namespace radmode;
namespace c = radmode::constants;

namespace {

StellarModel sphere(double gamma1, double mass_g = c::M_sun, double radius_cm = c::R_sun) {
  return test::uniform_sphere(test::uniform_mesh(400), gamma1, mass_g, radius_cm);
}

/// A ModeSet holding only the exact homologous fundamental xi = 1 with the given omega^2.
ModeSet exact_fundamental(const StellarModel& model, double omega2, double error = 0.0) {
  ModeSet set;
  set.node_r = model.r;
  ModeSolution f;
  f.order = 0;
  f.nodes = 0;
  f.order_agrees = true;
  f.inertia_multiplicity = 1;
  f.omega2 = f.omega2_fine = f.omega2_coarse = omega2;
  f.error_estimate = error;
  f.xi.assign(model.size(), 1.0);
  f.trusted = true;
  set.modes.push_back(f);
  return set;
}

double unit(const StellarModel& m) { return c::G * m.mass() / std::pow(m.radius(), 3); }

StabilityVerdict verdict_for(const StellarModel& model, double omega2, double error = 0.0) {
  const ModeSet set = exact_fundamental(model, omega2, error);
  return assess_stability(diagnose(model), make_mode_report(model, set, SolveOptions{}));
}

} // namespace

TEST_CASE("uniform sphere with Gamma1 = 1.3 is unstable with the analytic growth time") {
  const StellarModel model = sphere(1.3);
  const double omega2 = (3 * 1.3 - 4) * unit(model); // Sterne 1937 (closed form)
  const StabilityVerdict v = verdict_for(model, omega2);
  CHECK(v.newtonian == Verdict::unstable);
  CHECK(v.post_newtonian == Verdict::unstable);
  CHECK(v.unstable());
  REQUIRE(v.growing.size() == 1);
  CHECK(v.growing[0].growth_rate_s == doctest::Approx(std::sqrt(-omega2)));
  CHECK(v.growing[0].efolding_time_s == doctest::Approx(1.0 / std::sqrt(-omega2)));
  const double t_dyn = 1.0 / std::sqrt(c::G * 3 * c::M_sun / (4 * c::pi * std::pow(c::R_sun, 3)));
  CHECK(v.growing[0].efolding_time_t_dyn == doctest::Approx(1.0 / std::sqrt(-omega2) / t_dyn));
  // Evidence agrees: sigma_hom^2 = sigma0^2 = 3 Gamma1 - 4 for this exact homologous mode.
  CHECK(v.sigma2_homologous == doctest::Approx(3 * 1.3 - 4).epsilon(1e-4));
  CHECK(v.gamma1_below_4_3_zones.size() == 1);
  CHECK(v.notes.empty());
}

TEST_CASE("Gamma1 = 4/3 is marginal, 5/3 stable") {
  const StellarModel m43 = sphere(4.0 / 3.0);
  // Exact property (physics.md 5): omega0^2 = 0. A round-off-sized value of either sign is
  // still marginal (floor 1e-6 G M / R^3).
  for (double s : {0.0, 3e-7, -3e-7}) {
    const StabilityVerdict v = verdict_for(m43, s * unit(m43));
    CHECK(v.newtonian == Verdict::marginal);
    CHECK(v.growing.empty());
    // ... but relativity tips it: <Gamma1> - 4/3 = 0 < K 2GM/(Rc^2).
    CHECK(v.post_newtonian == Verdict::unstable);
  }
  // Beyond the floor but within twice the solver's own error estimate: marginal.
  CHECK(verdict_for(m43, -1e-4 * unit(m43), 0.6e-4 * unit(m43)).newtonian == Verdict::marginal);
  CHECK(verdict_for(m43, -1e-4 * unit(m43), 0.4e-4 * unit(m43)).newtonian == Verdict::unstable);

  const StellarModel m53 = sphere(5.0 / 3.0);
  const StabilityVerdict v = verdict_for(m53, 1.0 * unit(m53));
  CHECK(v.newtonian == Verdict::stable);
  CHECK(v.post_newtonian == Verdict::stable);
  CHECK_FALSE(v.unstable());
  CHECK(v.growing.empty());
}

TEST_CASE("where the homologous fundamental of the uniform sphere lives") {
  const StellarModel model = sphere(5.0 / 3.0);
  const StabilityVerdict v = verdict_for(model, 1.0 * unit(model));
  // Kinetic weight rho r^4 xi^2 dr with xi = 1 and rho const: cumulative share (r/R)^5, so the
  // central 90 % lies between (0.05)^(1/5) and (0.95)^(1/5); in mass m/M = (r/R)^3.
  REQUIRE(v.kinetic.defined);
  CHECK(v.kinetic.r_lo_over_R == doctest::Approx(std::pow(0.05, 0.2)).epsilon(2e-3));
  CHECK(v.kinetic.r_hi_over_R == doctest::Approx(std::pow(0.95, 0.2)).epsilon(2e-3));
  CHECK(v.kinetic.m_lo_over_M == doctest::Approx(std::pow(0.05, 0.6)).epsilon(3e-3));
  CHECK(v.kinetic.m_hi_over_M == doctest::Approx(std::pow(0.95, 0.6)).epsilon(3e-3));
  CHECK(v.kinetic.r_peak_over_R > 0.99);
  REQUIRE(v.work.defined);
  CHECK(v.work.r_lo_over_R < v.work.r_hi_over_R);
  // Stable, Gamma1 > 4/3 everywhere with xi = 1: w = (9 Gamma1 P r^2 - 4 G m rho r)/M has both
  // signs (the gravity term dominates near the surface where P -> 0), but the driving share is
  // below one half.
  CHECK(v.work_driving_fraction > 0.0);
  CHECK(v.work_driving_fraction < 0.5);
}

TEST_CASE("a fundamental above the homologous bound is called out") {
  const StellarModel model = sphere(5.0 / 3.0);
  const StabilityVerdict v = verdict_for(model, 2.0 * unit(model)); // bound: sigma0^2 <= 1
  CHECK(v.newtonian == Verdict::stable);
  REQUIRE(v.notes.size() == 1);
  CHECK(v.notes[0].find("homologous upper bound") != std::string::npos);
}

TEST_CASE("no fundamental: undetermined, never guessed") {
  const StellarModel model = sphere(5.0 / 3.0);
  ModeSet set = exact_fundamental(model, 1.0 * unit(model));
  set.modes[0].order = 1; // only an overtone
  const StabilityVerdict v =
      assess_stability(diagnose(model), make_mode_report(model, set, SolveOptions{}));
  CHECK(v.newtonian == Verdict::undetermined);
  CHECK_FALSE(v.fundamental_found);
  const StabilityVerdict e = assess_stability(diagnose(model), ModeReport{});
  CHECK(e.newtonian == Verdict::undetermined);
}

TEST_CASE("post-Newtonian verdict flips at <Gamma1> - 4/3 = K 2GM/(Rc^2)") {
  // Gamma1 = 4/3 + 0.01 uniform sphere of 1e4 M_sun: K = 19/42 (radiation limit), so the
  // critical radius is R_c = 2 G M K / (c^2 * 0.01).
  const double M = 1e4 * c::M_sun, excess = 0.01;
  const double Rc = 2 * c::G * M * (19.0 / 42.0) / (c::c_light * c::c_light * excess);
  for (double f : {0.98, 1.02}) {
    const StellarModel model = sphere(4.0 / 3.0 + excess, M, f * Rc);
    const StabilityVerdict v = verdict_for(model, 3 * excess * unit(model));
    CHECK(v.newtonian == Verdict::stable);
    CHECK(v.post_newtonian == (f < 1 ? Verdict::unstable : Verdict::stable));
    CHECK(v.gamma1_critical_pn ==
          doctest::Approx(4.0 / 3.0 + excess / f).epsilon(1e-5)); // 4/3 + K 2GM/(R c^2)
    // Either way the reader is told to look at the relativistic line.
    REQUIRE(v.notes.size() == 1);
    CHECK(v.notes[0].find(f < 1 ? "general relativity decides" : "within a factor 2") !=
          std::string::npos);
  }
}

TEST_CASE("verdict writers: JSON keys and readable text") {
  const StellarModel model = sphere(1.3);
  const StabilityVerdict v = verdict_for(model, (3 * 1.3 - 4) * unit(model));
  std::ostringstream js;
  JsonWriter j(js);
  j.begin_object();
  write_verdict_json(j, v);
  j.end_object();
  const std::string s = js.str();
  for (const char* key : {"\"verdict\"", "\"newtonian\": \"unstable\"", "\"post_newtonian\"",
                          "\"growing_modes\"", "\"efolding_time_s\"", "\"kinetic_energy_range\"",
                          "\"sigma2_homologous\""})
    CHECK_MESSAGE(s.find(key) != std::string::npos, key);
  std::ostringstream txt;
  write_verdict_text(txt, v);
  CHECK(txt.str().find("Newtonian:          UNSTABLE") != std::string::npos);
  CHECK(txt.str().find("e-folding time") != std::string::npos);
  CHECK(txt.str().find("nan") == std::string::npos);
}

TEST_CASE("invalid stability options") {
  StabilityOptions o;
  o.weight_fraction = 1.0;
  CHECK_THROWS_WITH_AS(o.validate(), doctest::Contains("weight_fraction"), UsageError);
  o = {};
  o.error_margin = 0.5;
  CHECK_THROWS_WITH_AS(o.validate(), doctest::Contains("error_margin"), UsageError);
  o = {};
  o.marginal_sigma2 = -1;
  CHECK_THROWS_WITH_AS(o.validate(), doctest::Contains("marginal_sigma2"), UsageError);
}
// Part 2: the verdict from the finite-element fundamental (solve_modes) on generated models.
namespace {

StabilityVerdict solved_verdict(const StellarModel& model, const DiagnosticsOptions& dopt = {}) {
  SolveOptions so;
  so.count = 1;
  const ModeSet set = solve_modes(model, so);
  return assess_stability(diagnose(model, dopt), make_mode_report(model, set, so));
}

StellarModel generated_uniform(double gamma1, std::size_t points = 400) {
  GeneratorOptions o;
  o.gamma1 = gamma1;
  o.points = points;
  return make_uniform(o);
}

} // namespace

TEST_CASE("solved: uniform sphere Gamma1 = 1.3 grows on the analytic time scale") {
  const StellarModel model = generated_uniform(1.3);
  const StabilityVerdict v = solved_verdict(model);
  // Sterne 1937: omega0^2 = (3 Gamma1 - 4) G M / R^3, growth time 1/sqrt(-omega0^2).
  const double omega2 = (3 * 1.3 - 4) * unit(model);
  CHECK(v.newtonian == Verdict::unstable);
  CHECK(v.fundamental_trusted);
  CHECK(v.omega2_fundamental_s2 == doctest::Approx(omega2).epsilon(1e-3));
  REQUIRE(v.growing.size() == 1);
  CHECK(v.growing[0].efolding_time_s == doctest::Approx(1.0 / std::sqrt(-omega2)).epsilon(1e-3));
  CHECK(v.notes.empty());
}

TEST_CASE("solved: Gamma1 = 4/3 everywhere is marginal (n = 0, 1.5, 3)") {
  // Exact property (physics.md 5): Gamma1 = 4/3 => xi = const with omega0^2 = 0, any structure.
  CHECK(solved_verdict(generated_uniform(4.0 / 3.0)).newtonian == Verdict::marginal);
  for (double n : {1.5, 3.0}) {
    GeneratorOptions o;
    o.gamma1 = 4.0 / 3.0;
    o.points = 400;
    const StabilityVerdict v = solved_verdict(make_polytrope(n, o));
    CHECK_MESSAGE(v.newtonian == Verdict::marginal,
                  "n = " << n << ": sigma0^2 = " << v.sigma2_fundamental << " +- "
                         << v.omega2_error_s2);
    CHECK(v.post_newtonian == Verdict::unstable); // relativity tips the marginal star
  }
}

TEST_CASE("solved: a thin Gamma1 < 4/3 layer is reported but the star stays stable") {
  GeneratorOptions o;
  o.points = 800;
  StellarModel model = make_polytrope(1.5, o);
  // Gamma1 = 1.2 in 0.80 < r/R < 0.82 (edges linear over one mesh interval).
  for (std::size_t i = 0; i < model.size(); ++i) {
    const double x = model.r[i] / model.radius();
    if (x > 0.80 && x < 0.82) model.gamma1[i] = 1.2;
  }
  const StabilityVerdict v = solved_verdict(model);
  REQUIRE(v.gamma1_below_4_3_zones.size() == 1);
  CHECK(v.gamma1_below_4_3_zones[0].r_inner_cm / model.radius() == doctest::Approx(0.80).epsilon(0.01));
  CHECK(v.gamma1_below_4_3_zones[0].r_outer_cm / model.radius() == doctest::Approx(0.82).epsilon(0.01));
  CHECK(v.newtonian == Verdict::stable); // the verdict follows the eigenvalue
  CHECK(v.post_newtonian == Verdict::stable);
  CHECK(v.sigma2_fundamental > 0.0);
  CHECK(v.sigma2_fundamental <= v.sigma2_homologous); // Rayleigh bound
  CHECK(v.work_driving_fraction > 0.0);               // the layer does push
}

TEST_CASE("solved: very massive standard models flip post-Newtonian stability at R_crit") {
  // Eddington standard model (generators.hpp): n = 3 with constant beta, so <Gamma1> = Gamma1(beta)
  // (Chandrasekhar 1939) and the closed form of the threshold is
  //   R_crit = K 2 G M / (c^2 (Gamma1(beta) - 4/3)),   K = 1.1245 (Chandrasekhar 1964, memory).
  GeneratorOptions o;
  o.mass_msun = 1e4;
  o.points = 400;
  const double g1 = gamma1_gas_radiation(eddington_beta(o.mass_msun, o.mu));
  const double M = o.mass_msun * c::M_sun;
  const double r_closed = 1.1245 * 2 * c::G * M / (c::c_light * c::c_light * (g1 - 4.0 / 3.0));
  auto pn_unstable_at = [&](double radius_cm) {
    GeneratorOptions oo = o;
    oo.radius_rsun = radius_cm / c::R_sun;
    return diagnose(make_standard_model(oo)).pn_unstable;
  };
  // Bisection in log R between a clearly unstable and a clearly stable radius.
  double lo = 0.5 * r_closed, hi = 2.0 * r_closed;
  REQUIRE(pn_unstable_at(lo));
  REQUIRE_FALSE(pn_unstable_at(hi));
  for (int it = 0; it < 40; ++it) {
    const double mid = std::sqrt(lo * hi);
    (pn_unstable_at(mid) ? lo : hi) = mid;
  }
  CHECK(lo == doctest::Approx(r_closed).epsilon(2e-4));

  // On both sides the model is Newtonian-stable: only relativity makes it unstable.
  for (double f : {0.8, 1.25}) {
    GeneratorOptions oo = o;
    oo.radius_rsun = f * r_closed / c::R_sun;
    const StabilityVerdict v = solved_verdict(make_standard_model(oo));
    CHECK(v.newtonian == Verdict::stable);
    CHECK(v.post_newtonian == (f < 1 ? Verdict::unstable : Verdict::stable));
    CHECK(v.unstable() == (f < 1));
  }
}
