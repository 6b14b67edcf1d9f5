// Model diagnostics (include/radmode/diagnostics.hpp) against published values, analytic
// results and facts of the trade.
#include "radmode/diagnostics.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/generators.hpp"
#include "analytic_models.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

using namespace radmode;
namespace c = radmode::constants;

namespace {
/// Generated polytrope (generators.hpp: Lane-Emden, stretched mesh, P = rho = 0 at R).
StellarModel polytrope_model(double n, std::size_t points, double mass_g, double radius_cm,
                             double gamma1) {
  GeneratorOptions o;
  o.points = points;
  o.mass_msun = mass_g / c::M_sun;
  o.radius_rsun = radius_cm / c::R_sun;
  o.gamma1 = gamma1;
  return make_polytrope(n, o);
}

/// Generated uniform sphere (generators.hpp, stretched mesh).
StellarModel generated_uniform(std::size_t points, double gamma1) {
  GeneratorOptions o;
  o.points = points;
  o.gamma1 = gamma1;
  return make_uniform(o);
}

StellarModel uniform_sphere_model(std::size_t points, double mass_g, double radius_cm,
                                  double gamma1) {
  return radmode::test::uniform_sphere(radmode::test::uniform_mesh(points - 1), gamma1, mass_g,
                                       radius_cm);
}
} // namespace

TEST_CASE("time scales of the Sun-scaled n = 3 polytrope") {
  const StellarModel model = polytrope_model(3.0, 801, c::M_sun, c::R_sun, 5.0 / 3.0);
  const ModelDiagnostics d = diagnose(model);
  // physics.md section 2 (derived from the nominal IAU 2015 M_sun, R_sun and CODATA G):
  // t_dyn = 3260 s, t_K = 1593 s, t_ff = 1769 s. Fact of the trade (common practice): the
  // Sun's dynamical time is about an hour.
  CHECK(d.t_dyn_s == doctest::Approx(3260).epsilon(1e-3));
  CHECK(d.t_kepler_s == doctest::Approx(1593).epsilon(1e-3));
  CHECK(d.t_freefall_s == doctest::Approx(1769).epsilon(1e-3));
  CHECK(d.t_dyn_s / c::hour_s == doctest::Approx(0.91).epsilon(0.01));
  // Exact relations between the definitions: t_ff = pi t_K / sqrt(8), t_dyn = sqrt(4 pi/3) t_K.
  CHECK(d.t_freefall_s == doctest::Approx(c::pi * d.t_kepler_s / std::sqrt(8.0)).epsilon(1e-12));
  CHECK(d.t_dyn_s == doctest::Approx(std::sqrt(4.0 * c::pi / 3.0) * d.t_kepler_s).epsilon(1e-12));
  // Common practice: in hydrostatic equilibrium t_ff, t_sc and t_dyn agree within a factor of a
  // few.
  for (double t : {d.t_freefall_s, d.t_sound_s}) {
    CHECK(t / d.t_dyn_s > 1.0 / 4.0);
    CHECK(t / d.t_dyn_s < 4.0);
  }
  // Chandrasekhar 1939 (Table 4), physics.md section 7: rho_c / rho_mean = 54.1825 for n = 3.
  CHECK(d.rho_c_over_mean == doctest::Approx(54.1825).epsilon(2e-4));
  CHECK(d.mass_g == c::M_sun);
  CHECK(d.radius_cm == c::R_sun);
  CHECK(d.mean_density_g_cm3 == doctest::Approx(1.41).epsilon(5e-3)); // Sun, common practice
  CHECK(d.has_centre);
  // The generated model is in equilibrium: no hydrostatic or mass warning.
  CHECK(d.hse_residual_max < 1e-2);
  CHECK(d.mass_consistency < 1e-4);
  for (const auto& w : d.warnings) CHECK_MESSAGE(w.code != "hse_residual", w.message);
  CHECK(d.gamma1_pressure_weighted == doctest::Approx(5.0 / 3.0));
  CHECK(d.gamma1_below_4_3_zones.empty());
}

TEST_CASE("sound-crossing time of the uniform sphere is analytic") {
  // c_s^2 = Gamma1 P / rho = Gamma1 (G M / 2R) (1 - x^2): int_0^R dr / c_s =
  // R (2R / (Gamma1 G M))^(1/2) * pi / 2. The sound speed vanishes at the surface (integrable
  // singularity), which the per-cell rule must handle.
  const double M = 2 * c::M_sun, R = 3 * c::R_sun, g = 5.0 / 3.0;
  const StellarModel model = uniform_sphere_model(2001, M, R, g);
  const ModelDiagnostics d = diagnose(model);
  const double exact = R * std::sqrt(2.0 * R / (g * c::G * M)) * c::pi / 2.0;
  CHECK(d.t_sound_s == doctest::Approx(exact).epsilon(2e-3));
  const ModelDiagnostics d2 = diagnose(uniform_sphere_model(8001, M, R, g));
  // The error shrinks with resolution (it is set by the last cell's square-root singularity).
  CHECK(std::abs(d2.t_sound_s - exact) < std::abs(d.t_sound_s - exact));
  CHECK(d.rho_c_over_mean == doctest::Approx(1.0));
  CHECK(d.hse_residual_max < 1e-8); // P is quadratic in r and linear in m^(2/3): exact
}

TEST_CASE("post-Newtonian structure coefficient K: published values") {
  // Chandrasekhar 1964 (ApJ 140, 417), values from memory, physics.md section 5:
  // K = 1.1245 for n = 3 and 19/42 for the uniform sphere. 19/42 is re-derived analytically in
  // docs/dev-diag.md (with u = 3P/rho). Both must come out to 3 digits.
  const ModelDiagnostics n3 = diagnose(polytrope_model(3.0, 801, c::M_sun, c::R_sun, 5.0 / 3.0));
  CHECK(n3.pn_coefficient == doctest::Approx(1.1245).epsilon(5e-4));
  CHECK(n3.pn_coefficient_radiation_limit == n3.pn_coefficient);
  CHECK(n3.binding_a == doctest::Approx(1.5).epsilon(1e-4)); // a = 3/(5 - n)

  const ModelDiagnostics u = diagnose(generated_uniform(801, 5.0 / 3.0));
  CHECK(u.pn_coefficient == doctest::Approx(19.0 / 42.0).epsilon(5e-4));
  CHECK(u.binding_a == doctest::Approx(0.6).epsilon(1e-4));

  // The same integral with the model's own u = P/((Gamma1 - 1) rho): for Gamma1 = 4/3 it is the
  // radiation limit again; for Gamma1 = 5/3 the uniform sphere gives 5/21 (analytic,
  // docs/dev-diag.md) -- why the structure coefficient is defined in the radiation limit.
  const ModelDiagnostics u43 = diagnose(generated_uniform(801, 4.0 / 3.0));
  CHECK(u43.pn_coefficient_model_energy == doctest::Approx(19.0 / 42.0).epsilon(5e-4));
  CHECK(u.pn_coefficient_model_energy == doctest::Approx(5.0 / 21.0).epsilon(5e-4));
  DiagnosticsOptions opt;
  opt.pn_energy = PnEnergy::model;
  CHECK(diagnose(uniform_sphere_model(801, c::M_sun, c::R_sun, 5.0 / 3.0), opt).pn_coefficient ==
        doctest::Approx(5.0 / 21.0).epsilon(5e-4));

  // A tabulated u column takes precedence over P/((Gamma1 - 1) rho).
  StellarModel with_u = uniform_sphere_model(801, c::M_sun, c::R_sun, 5.0 / 3.0);
  with_u.u.resize(with_u.size());
  for (std::size_t i = 0; i < with_u.size(); ++i) with_u.u[i] = 3.0 * with_u.P[i] / with_u.rho[i];
  const ModelDiagnostics wu = diagnose(with_u, opt);
  CHECK(wu.model_has_u);
  CHECK(wu.pn_coefficient == doctest::Approx(19.0 / 42.0).epsilon(5e-4));
}

TEST_CASE("homologous sigma^2 and <Gamma1> of the uniform sphere") {
  // sigma_hom^2 = sigma_0^2 = 3 Gamma1 - 4 for the uniform sphere (Sterne 1937; the
  // fundamental of the uniform sphere is exactly homologous).
  for (double g : {1.3, 4.0 / 3.0, 5.0 / 3.0}) {
    const ModelDiagnostics d = diagnose(uniform_sphere_model(401, c::M_sun, c::R_sun, g));
    CHECK(d.sigma2_homologous == doctest::Approx(3 * g - 4).epsilon(1e-4).scale(1));
    CHECK(d.gamma1_pressure_weighted == doctest::Approx(g));
    CHECK(d.gamma1_min == doctest::Approx(g));
    CHECK(d.compactness ==
          doctest::Approx(2 * c::G * c::M_sun / (c::R_sun * c::c_light * c::c_light)));
    if (g < 4.0 / 3.0) {
      REQUIRE(d.gamma1_below_4_3_zones.size() == 1);
      CHECK(d.gamma1_below_4_3_zones[0].r_inner_cm == 0.0);
      CHECK(d.gamma1_below_4_3_zones[0].r_outer_cm == c::R_sun);
      CHECK(d.gamma1_below_4_3_zones[0].m_outer_g == c::M_sun);
      CHECK(d.pn_unstable);
    } else {
      CHECK(d.gamma1_below_4_3_zones.empty());
    }
  }
}

TEST_CASE("a thin Gamma1 < 4/3 layer is located by radius and mass") {
  StellarModel model = polytrope_model(1.5, 401, c::M_sun, c::R_sun, 5.0 / 3.0);
  // Gamma1 dips linearly to 1.2 at r/R = 0.7, back to 5/3 at 0.65 and 0.75 (a triangle):
  // it crosses 4/3 at r/R = 0.7 -/+ 0.05 * (4/3 - 1.2)/(5/3 - 1.2) = 0.7 -/+ 0.0142857.
  for (std::size_t i = 0; i < model.size(); ++i) {
    const double x = model.r[i] / model.radius();
    const double t = std::abs(x - 0.7) / 0.05;
    if (t < 1.0) model.gamma1[i] = 1.2 + (5.0 / 3.0 - 1.2) * t;
  }
  const ModelDiagnostics d = diagnose(model);
  REQUIRE(d.gamma1_below_4_3_zones.size() == 1);
  const auto& z = d.gamma1_below_4_3_zones[0];
  const double half = 0.05 * (4.0 / 3.0 - 1.2) / (5.0 / 3.0 - 1.2);
  // Gamma1 is linear in r between the points around each crossing, so crossings are exact.
  CHECK(z.r_inner_cm / c::R_sun == doctest::Approx(0.7 - half).epsilon(1e-9));
  CHECK(z.r_outer_cm / c::R_sun == doctest::Approx(0.7 + half).epsilon(1e-9));
  // No mesh point sits exactly at the bottom of the dip: the tabulated minimum is within one
  // mesh spacing (< 0.005 R on this 401-point mesh, slope 9.33 per R) of 1.2.
  CHECK(z.gamma1_min >= 1.2);
  CHECK(z.gamma1_min < 1.2 + 9.34 * 0.005);
  CHECK(z.m_inner_g > 0.0);
  CHECK(z.m_outer_g > z.m_inner_g);
  CHECK(z.m_outer_g < c::M_sun);
  CHECK(d.gamma1_min == z.gamma1_min);
  CHECK(std::abs(d.gamma1_min_r_cm / c::R_sun - 0.7) < 0.005);
  CHECK(d.gamma1_pressure_weighted > 4.0 / 3.0);
  CHECK(d.sigma2_homologous > 0.0);
}

TEST_CASE("hydrostatic residual finds a perturbed point and names its line") {
  StellarModel model = polytrope_model(1.5, 201, c::M_sun, c::R_sun, 5.0 / 3.0);
  model.source = "star.txt";
  model.line.resize(model.size());
  for (std::size_t i = 0; i < model.size(); ++i) model.line[i] = i + 12;
  const ModelDiagnostics clean = diagnose(model);
  CHECK(clean.hse_residual_max < 1e-2);
  const std::size_t k = 120;
  model.P[k] *= 1.05; // a 5 % pressure error at one point
  const ModelDiagnostics d = diagnose(model);
  CHECK(d.hse_residual_max > 0.1);
  // The worst residual sits at or next to the perturbed point.
  CHECK(d.hse_worst_index + 1 >= k);
  CHECK(d.hse_worst_index <= k + 1);
  CHECK(d.hse_worst_line == d.hse_worst_index + 12);
  bool warned = false;
  for (const auto& w : d.warnings)
    if (w.code == "hse_residual") {
      warned = true;
      CHECK(w.message.find("star.txt line") != std::string::npos);
    }
  CHECK(warned);
}

TEST_CASE("without the checks: the same masses, time scales, integrals and criteria") {
  // (What `radmode track` asks for.) A model with a 5 % pressure error at one point: the
  // checks warn about it; without them nothing else changes, bit for bit.
  StellarModel model = polytrope_model(1.5, 201, c::M_sun, c::R_sun, 5.0 / 3.0);
  model.P[120] *= 1.05;
  DiagnosticsOptions off;
  off.checks = false;
  const ModelDiagnostics a = diagnose(model), b = diagnose(model, off);
  CHECK(a.hse_residual_max > 0.1);
  CHECK(b.hse_residual_max == 0.0);
  CHECK(b.hse_points_checked == 0);
  CHECK(std::isfinite(a.t_sound_s));
  CHECK(std::isnan(b.t_sound_s));
  bool warned = false;
  for (const auto& w : a.warnings) warned = warned || w.code == "hse_residual";
  CHECK(warned);
  for (const auto& w : b.warnings) {
    CHECK(w.code != "hse_residual");
    CHECK(w.code != "hse_unchecked");
  }
  CHECK(a.mass_g == b.mass_g);
  CHECK(a.radius_cm == b.radius_cm);
  CHECK(a.t_dyn_s == b.t_dyn_s);
  CHECK(a.gamma1_pressure_weighted == b.gamma1_pressure_weighted);
  CHECK(a.mass_consistency == b.mass_consistency);
  CHECK(a.omega2_homologous == b.omega2_homologous);
  CHECK(a.pn_coefficient == b.pn_coefficient);
  CHECK(a.gamma1_critical_pn == b.gamma1_critical_pn);
  CHECK(a.pn_unstable == b.pn_unstable);
}

TEST_CASE("stability only: the verdicts' quantities bit for bit, nothing else") {
  // (What a `radmode track` row reads.) A model with Gamma1 < 4/3 in the middle, which the
  // full run reports as a zone, and a mass error, which it warns about.
  StellarModel model = polytrope_model(3.0, 301, c::M_sun, c::R_sun, 5.0 / 3.0);
  for (std::size_t i = 100; i < 150; ++i) model.gamma1[i] = 1.30;
  for (auto& rho : model.rho) rho *= 1.01;
  for (const PnEnergy energy : {PnEnergy::radiation_limit, PnEnergy::model}) {
    DiagnosticsOptions full_options, lean_options;
    full_options.pn_energy = lean_options.pn_energy = energy;
    lean_options.stability_only = true;
    const ModelDiagnostics a = diagnose(model, full_options), b = diagnose(model, lean_options);
    REQUIRE(!a.warnings.empty());
    REQUIRE(!a.gamma1_below_4_3_zones.empty());
    CHECK(a.points == b.points);
    CHECK(a.mass_g == b.mass_g);
    CHECK(a.radius_cm == b.radius_cm);
    CHECK(a.mean_density_g_cm3 == b.mean_density_g_cm3);
    CHECK(a.rho_c_g_cm3 == b.rho_c_g_cm3);
    CHECK(a.t_dyn_s == b.t_dyn_s);
    CHECK(a.t_kepler_s == b.t_kepler_s);
    CHECK(a.t_freefall_s == b.t_freefall_s);
    CHECK(a.gamma1_pressure_weighted == b.gamma1_pressure_weighted);
    CHECK(a.compactness == b.compactness);
    CHECK(a.binding_a == b.binding_a);
    CHECK(a.pn_coefficient_radiation_limit == b.pn_coefficient_radiation_limit);
    CHECK(a.pn_coefficient == b.pn_coefficient);
    CHECK(a.gamma1_critical_pn == b.gamma1_critical_pn);
    CHECK(a.pn_unstable == b.pn_unstable);
    if (energy == PnEnergy::model)
      CHECK(a.pn_coefficient_model_energy == b.pn_coefficient_model_energy);
    else
      CHECK(std::isnan(b.pn_coefficient_model_energy));
    CHECK(std::isnan(b.t_sound_s));
    CHECK(std::isnan(b.mass_consistency));
    CHECK(std::isnan(b.gamma1_min));
    CHECK(std::isnan(b.omega2_homologous));
    CHECK(b.gamma1_below_4_3_zones.empty());
    CHECK(b.hse_points_checked == 0);
    CHECK(b.warnings.empty());
  }
}

TEST_CASE("mass inconsistency is reported") {
  StellarModel model = uniform_sphere_model(201, c::M_sun, c::R_sun, 5.0 / 3.0);
  CHECK(diagnose(model).mass_consistency < 1e-4);
  for (auto& rho : model.rho) rho *= 1.1; // the density no longer integrates to m
  const ModelDiagnostics d = diagnose(model);
  CHECK(d.mass_consistency == doctest::Approx(0.1).epsilon(1e-3));
  bool warned = false;
  for (const auto& w : d.warnings) warned = warned || w.code == "mass_inconsistent";
  CHECK(warned);
}

TEST_CASE("envelope model without centre is flagged") {
  StellarModel model = polytrope_model(3.0, 401, c::M_sun, c::R_sun, 5.0 / 3.0);
  for (auto* v : {&model.r, &model.m, &model.P, &model.rho, &model.gamma1})
    v->erase(v->begin(), v->begin() + 40);
  const ModelDiagnostics d = diagnose(model);
  CHECK_FALSE(d.has_centre);
  bool warned = false;
  for (const auto& w : d.warnings) warned = warned || w.code == "no_centre";
  CHECK(warned);
  CHECK(d.mass_consistency < 1e-3);
  CHECK(d.hse_residual_max < 1e-2);
}

TEST_CASE("invalid options are usage errors naming the option") {
  const StellarModel model = uniform_sphere_model(50, c::M_sun, c::R_sun, 5.0 / 3.0);
  DiagnosticsOptions opt;
  opt.hse_warn = -1;
  CHECK_THROWS_WITH_AS(diagnose(model, opt), doctest::Contains("hse_warn"), UsageError);
  opt = {};
  opt.hse_pressure_floor = 1.5;
  CHECK_THROWS_WITH_AS(diagnose(model, opt), doctest::Contains("hse_pressure_floor"), UsageError);
}

namespace {

/// The HSE check of diagnostics.hpp written out point by point, one neighbour at a time, as
/// its header comment defines it (three-point derivative with the textbook non-uniform
/// weights; radius form and mass form; stencils widened while P, and for the mass form m,
/// differ by less than 1e-4 relative). Reference for the faster search in diagnose().
struct NaiveHse {
  double max = -1;
  std::size_t worst = 0, checked = 0, skipped = 0;
};

NaiveHse naive_hse(const StellarModel& md, double floor_fraction) {
  const auto& r = md.r;
  const auto& m = md.m;
  const auto& P = md.P;
  const std::size_t n = md.size();
  std::vector<double> s(n);
  for (std::size_t i = 0; i < n; ++i) s[i] = std::cbrt(m[i] * m[i]);
  double p_max = 0;
  for (double p : P) p_max = std::max(p_max, p);
  const double nan = std::numeric_limits<double>::quiet_NaN();
  auto form = [&](const std::vector<double>& x, std::size_t i, double target, bool use_m,
                  bool need_factor_2) {
    auto close = [&](std::size_t j) {
      return std::abs(P[j] - P[i]) < 1e-4 * P[i] || (use_m && std::abs(m[j] - m[i]) < 1e-4 * m[i]);
    };
    std::size_t a = i, b = i;
    while (a > 0 && x[a] == x[i]) --a;
    while (b + 1 < n && x[b] == x[i]) ++b;
    if (x[a] == x[i] || x[b] == x[i]) return nan;
    while (close(a) && a > 0) --a;
    while (close(b) && b + 1 < n) ++b;
    if (close(a) || close(b)) return nan;
    if (need_factor_2 && std::min(P[a], P[b]) < 0.5 * std::max(P[a], P[b])) return nan;
    const double h1 = x[i] - x[a], h2 = x[b] - x[i];
    const double d =
        -h2 / (h1 * (h1 + h2)) * P[a] + (h2 - h1) / (h1 * h2) * P[i] + h1 / (h2 * (h1 + h2)) * P[b];
    return std::abs(d - target) / std::abs(target);
  };
  NaiveHse out;
  for (std::size_t i = 1; i + 1 < n; ++i) {
    if (!(r[i] > 0) || !(m[i] > 0) || P[i] < floor_fraction * p_max) {
      ++out.skipped;
      continue;
    }
    const double by_r = form(r, i, -c::G * m[i] * md.rho[i] / (r[i] * r[i]), false, true);
    const double by_m = form(
        s, i, -3 * c::G * std::pow(m[i], 4.0 / 3.0) / (8 * c::pi * std::pow(r[i], 4)), true, false);
    if (std::isnan(by_r) && std::isnan(by_m)) {
      ++out.skipped;
      continue;
    }
    const double res = std::isnan(by_r) ? by_m : std::isnan(by_m) ? by_r : std::min(by_r, by_m);
    ++out.checked;
    if (res > out.max) {
      out.max = res;
      out.worst = i;
    }
  }
  return out;
}

void check_hse_against_naive(const StellarModel& md) {
  const auto d = diagnose(md);
  const auto ref = naive_hse(md, DiagnosticsOptions{}.hse_pressure_floor);
  CHECK(d.hse_points_checked == ref.checked);
  CHECK(d.hse_points_skipped == ref.skipped);
  CHECK(d.hse_worst_index == ref.worst);
  // Same definition, other arrangement of the arithmetic: agreement to round-off, amplified
  // by at most 1e4 by the differences of P across a stencil.
  CHECK(d.hse_residual_max == doctest::Approx(ref.max).epsilon(1e-9));
}

} // namespace

TEST_CASE("hydrostatic residual: the stencil search agrees with the point-by-point definition") {
  SUBCASE("polytropes n = 1.5 and 3 (wide stencils near the centre)") {
    for (double n : {1.5, 3.0})
      for (std::size_t points : {57u, 2000u}) {
        CAPTURE(n);
        CAPTURE(points);
        check_hse_against_naive(polytrope_model(n, points, c::M_sun, c::R_sun, 5.0 / 3.0));
      }
  }
  SUBCASE("a flat-pressure core and a pressure bump (P not monotonic: one step at a time)") {
    auto md = polytrope_model(3.0, 800, c::M_sun, c::R_sun, 5.0 / 3.0);
    for (std::size_t i = 0; i < 120; ++i) md.P[i] = md.P[120]; // unresolved core
    check_hse_against_naive(md);
    md.P[400] *= 1.05; // a bump: P is no longer monotonic
    check_hse_against_naive(md);
  }
  SUBCASE("noise on m (P and m stay monotonic) or on P: the largest residual anywhere") {
    // diagnose() evaluates the mass form only where it can change the largest residual; the
    // point-by-point definition evaluates both forms everywhere.
    for (double amplitude : {1e-7, 1e-6, 1e-5}) {
      CAPTURE(amplitude);
      auto md = polytrope_model(3.0, 800, c::M_sun, c::R_sun, 5.0 / 3.0);
      for (std::size_t i = 1; i + 1 < md.size(); ++i)
        md.m[i] *= 1.0 + amplitude * std::sin(0.7 * static_cast<double>(i));
      check_hse_against_naive(md);
      auto mp = polytrope_model(1.5, 800, c::M_sun, c::R_sun, 5.0 / 3.0);
      for (std::size_t i = 1; i + 1 < mp.size(); ++i)
        mp.P[i] *= 1.0 + 100 * amplitude * std::sin(1.3 * static_cast<double>(i));
      check_hse_against_naive(mp);
    }
  }
}
