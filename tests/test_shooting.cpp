// Tests of the shooting solver (shooting.hpp) against closed-form results.
#include "radmode/constants.hpp"
#include "radmode/eigensolve.hpp"
#include "radmode/error.hpp"
#include "radmode/generators.hpp"
#include "radmode/shooting.hpp"

#include "analytic_models.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <vector>
#include <string>

using namespace radmode;

namespace {

/// Exact coefficients of the homogeneous (uniform-density) sphere:
/// P = P_c (1 - x^2), m = M x^3, so V = 2 x^2/(1 - x^2) and x^3/q = 1.
ShootingProblem uniform_sphere(double gamma1, double delta = 1e-7) {
  ShootingProblem p;
  p.x_inner = 0.0;
  p.x_surface = 1.0 - delta;
  p.singular_surface = true;
  p.coefficients = [gamma1](double x, std::size_t) {
    LaweCoefficients c;
    c.V = 2.0 * x * x / (1.0 - x * x);
    c.Vp = c.V; // hydrostatic equilibrium
    c.gamma1 = gamma1;
    c.x3_over_q = 1.0;
    return c;
  };
  return p;
}

/// Sterne 1937 (MNRAS 97, 582): sigma_k^2 = Gamma1 (k+1)(2k+3) - 4 for the uniform sphere.
double sterne(double gamma1, int k) { return gamma1 * (k + 1) * (2 * k + 3) - 4.0; }

} // namespace

TEST_CASE("uniform sphere: Sterne's eigenvalues and node counts, several Gamma1") {
  // Source: Sterne 1937, MNRAS 97, 582 (closed form; re-derived in physics.md section 7).
  for (double gamma1 : {5.0 / 3.0, 1.4, 4.0 / 3.0 + 0.05, 2.0}) {
    const ShootingProblem problem = uniform_sphere(gamma1);
    for (int k = 0; k <= 5; ++k) {
      const double exact = sterne(gamma1, k);
      // Start 3 % off (and off to alternating sides) so the bracketing is really exercised.
      const double guess = exact * (k % 2 == 0 ? 1.03 : 0.97);
      const ShootResult r = shoot_sigma2(problem, guess);
      CAPTURE(gamma1);
      CAPTURE(k);
      CAPTURE(r.message);
      REQUIRE(r.converged);
      CHECK(r.nodes == k);
      CHECK(std::abs(r.sigma2 - exact) <= 1e-7 * std::max(1.0, std::abs(exact)));
      // The error estimate is honest: it covers the actual error, and it is not absurdly large.
      CHECK(std::abs(r.sigma2 - exact) <= r.error_estimate);
      CHECK(r.error_estimate < 1e-5 * std::max(1.0, std::abs(exact)));
    }
  }
}

TEST_CASE("uniform sphere, Gamma1 = 1.3: negative fundamental omega^2 (dynamically unstable)") {
  // Classical result (Ledoux; Sterne 1937): omega_0^2 = (3 Gamma1 - 4) GM/R^3 = -0.1 GM/R^3.
  const ShootingProblem problem = uniform_sphere(1.3);
  const ShootResult r = shoot_sigma2(problem, -0.2);
  REQUIRE(r.converged);
  CHECK(r.nodes == 0);
  CHECK(r.sigma2 == doctest::Approx(-0.1).epsilon(1e-8));
  CHECK(r.sigma2 < 0.0);
  // First overtone of the same sphere, Sterne: 1.3 * 2 * 5 - 4 = 9.
  const ShootResult r1 = shoot_sigma2(problem, 8.5);
  REQUIRE(r1.converged);
  CHECK(r1.nodes == 1);
  CHECK(r1.sigma2 == doctest::Approx(9.0).epsilon(1e-8));
}

TEST_CASE("Gamma1 = 4/3 exactly: marginal fundamental omega^2 = 0") {
  // Analytic (physics.md section 5): Gamma1 = 4/3 everywhere gives xi = const, omega_0^2 = 0.
  const ShootResult r = shoot_sigma2(uniform_sphere(4.0 / 3.0), 0.05);
  REQUIRE(r.converged);
  CHECK(r.nodes == 0);
  CHECK(std::abs(r.sigma2) < 1e-8);
}

TEST_CASE("the mismatch is small at the root and the tolerance controls the accuracy") {
  const double exact = sterne(5.0 / 3.0, 2); // 31
  ShootOptions loose;
  loose.rel_tol = 1e-6;
  ShootOptions tight;
  tight.rel_tol = 1e-11;
  const ShootResult rl = shoot_sigma2(uniform_sphere(5.0 / 3.0), 30.0, loose);
  const ShootResult rt = shoot_sigma2(uniform_sphere(5.0 / 3.0), 30.0, tight);
  REQUIRE(rl.converged);
  REQUIRE(rt.converged);
  CHECK(rt.mismatch < 1e-6);
  CHECK(std::abs(rt.sigma2 - exact) < std::abs(rl.sigma2 - exact) + 1e-12);
  CHECK(std::abs(rl.sigma2 - exact) <= rl.error_estimate);
  CHECK(std::abs(rt.sigma2 - exact) <= rt.error_estimate);
}

TEST_CASE("matching point and surface start do not change the eigenvalue") {
  for (double frac : {0.2, 0.5, 0.8}) {
    ShootOptions o;
    o.match_r_frac = frac;
    const ShootResult r = shoot_sigma2(uniform_sphere(5.0 / 3.0), 12.0, o);
    REQUIRE(r.converged);
    CHECK(r.nodes == 1);
    CHECK(r.sigma2 == doctest::Approx(38.0 / 3.0).epsilon(1e-8));
  }
  // Starting the inward integration at 1 - delta: for this model (V ~ 1/(1-x), locally n = 0)
  // the error falls like delta^2 ln(1/delta) (shooting.hpp); check it shrinks ~100x per 10x.
  const ShootResult d4 = shoot_sigma2(uniform_sphere(5.0 / 3.0, 1e-4), 12.0);
  const ShootResult d5 = shoot_sigma2(uniform_sphere(5.0 / 3.0, 1e-5), 12.0);
  REQUIRE(d4.converged);
  REQUIRE(d5.converged);
  const double e4 = std::abs(d4.sigma2 - 38.0 / 3.0), e5 = std::abs(d5.sigma2 - 38.0 / 3.0);
  CAPTURE(e4);
  CAPTURE(e5);
  CHECK(e4 < 1e-5);
  CHECK(e5 < e4 / 30.0);
}

TEST_CASE("breaks: the integration restarts with each piece's coefficients; delta P continuous") {
  // Uniform sphere split at x = 0.6 into two pieces with identical coefficients: the answer
  // must not change (the restart itself must be exact), and each piece is evaluated only on
  // its own side.
  ShootingProblem p = uniform_sphere(5.0 / 3.0);
  p.breaks = {0.6};
  int calls_outer = 0, wrong_side = 0;
  const auto base = p.coefficients;
  p.coefficients = [base, &calls_outer, &wrong_side](double x, std::size_t piece) {
    if (piece == 1) ++calls_outer;
    if ((piece == 1 && x < 0.6) || (piece == 0 && x > 0.6) || piece > 1) ++wrong_side;
    return base(x, piece);
  };
  const ShootResult r = shoot_sigma2(p, 31.5);
  REQUIRE(r.converged);
  CHECK(calls_outer > 0);
  CHECK(wrong_side == 0);
  CHECK(r.nodes == 2);
  CHECK(r.sigma2 == doctest::Approx(31.0).epsilon(1e-8));

  // A pressure_jump of 1 (continuous P) is the same as none.
  p.pressure_jump = {1.0};
  const ShootResult rj = shoot_sigma2(p, 31.5);
  REQUIRE(rj.converged);
  CHECK(rj.sigma2 == r.sigma2);
}

TEST_CASE("fixed surface pressure on a model with P_s > 0, and a rigid inner boundary") {
  // The uniform sphere truncated at 0.9 of its radius, rescaled to radius 1 (P_s > 0):
  // q = x^3 still and V(x) = 2 y^2/(1 - y^2) with y = 0.9 x.
  ShootingProblem p;
  p.x_surface = 1.0;
  p.singular_surface = false;
  p.coefficients = [](double x, std::size_t) {
    const double y = 0.9 * x;
    const double V = 2.0 * y * y / (1.0 - y * y);
    return LaweCoefficients{V, V, 5.0 / 3.0, 1.0};
  };
  // Regular surface condition: xi = const, p = -3 Gamma1 xi solves the interior equations of any
  // uniform-density model and meets p = -(4 + sigma^2) xi for sigma^2 = 3 Gamma1 - 4 = 1, so the
  // fundamental stays exactly at 1 (derived here from the equations of physics.md section 3).
  const ShootResult f = shoot_sigma2(p, 1.2);
  REQUIRE(f.converged);
  CHECK(f.nodes == 0);
  CHECK(f.sigma2 == doctest::Approx(1.0).epsilon(1e-9));
  // Sturm-Liouville ordering (physics.md section 3): node counts 0, 1, 2 in increasing order,
  // for both surface conditions; the fixed-pressure fundamental differs from the regular one.
  const double guesses[2][3] = {{1.2, 14.0, 40.0}, {3.0, 22.0, 50.0}};
  int which = 0;
  for (auto surface : {SurfaceCondition::regular, SurfaceCondition::fixed_pressure}) {
    ShootOptions o;
    o.surface = surface;
    double last = -1e300;
    for (int k = 0; k < 3; ++k) {
      const ShootResult r = shoot_sigma2(p, guesses[which][k], o);
      CAPTURE(which);
      CAPTURE(k);
      CAPTURE(r.message);
      REQUIRE(r.converged);
      CHECK(r.nodes == k);
      CHECK(r.sigma2 > last);
      if (surface == SurfaceCondition::fixed_pressure && k == 0)
        CHECK(std::abs(r.sigma2 - 1.0) > 0.1);
      last = r.sigma2;
    }
    ++which;
  }
  // Rigid inner condition on a model that reaches the centre: same as the regular centre.
  {
    ShootOptions rigid;
    rigid.inner = InnerCondition::rigid;
    const ShootResult rr = shoot_sigma2(uniform_sphere(5.0 / 3.0), 12.0, rigid);
    REQUIRE(rr.converged);
    CHECK(rr.sigma2 == doctest::Approx(38.0 / 3.0).epsilon(1e-9));
  }
  // Rigid inner boundary at x = 0.3 of a full uniform sphere: xi(0.3) = 0 is not a node, and
  // clamping the inside raises the fundamental above the free sphere's sigma^2 = 1 (a constraint
  // on the trial space can only raise the minimum of the Rayleigh quotient).
  ShootingProblem env = uniform_sphere(5.0 / 3.0);
  env.x_inner = 0.3;
  ShootOptions o;
  o.inner = InnerCondition::rigid;
  ShootResult r0;
  for (double g : {2.0, 4.0, 8.0, 16.0}) {
    r0 = shoot_sigma2(env, g, o);
    if (r0.converged && r0.nodes == 0) break;
  }
  REQUIRE(r0.converged);
  CHECK(r0.nodes == 0);
  CHECK(r0.sigma2 > 1.0);
}

TEST_CASE("options are validated and problems report failures as statuses") {
  ShootOptions o;
  o.rel_tol = 0.5;
  CHECK_THROWS_AS(o.validate(), UsageError);
  try {
    o.validate();
  } catch (const UsageError& e) {
    CHECK(std::string(e.what()).find("rel_tol") != std::string::npos);
  }
  o = {};
  o.match_r_frac = 1.0;
  CHECK_THROWS_AS(o.validate(), UsageError);
  o = {};
  o.max_iterations = 1;
  CHECK_THROWS_AS(o.validate(), UsageError);
  o = {};
  o.agree_factor = 0.0;
  CHECK_THROWS_AS(o.validate(), UsageError);

  // A guess far from any eigenvalue with too few evaluations: not converged, with a message.
  ShootOptions few;
  few.max_iterations = 5;
  const ShootResult r = shoot_sigma2(uniform_sphere(5.0 / 3.0), 20.0, few);
  CHECK_FALSE(r.converged);
  CHECK_FALSE(r.message.empty());

  // Coefficients that produce a non-finite solution are reported, not thrown.
  ShootingProblem bad = uniform_sphere(5.0 / 3.0);
  bad.coefficients = [](double, std::size_t) {
    return LaweCoefficients{std::nan(""), std::nan(""), 5.0 / 3.0, 1.0};
  };
  const ShootResult rb = shoot_sigma2(bad, 1.0);
  CHECK_FALSE(rb.converged);
  CHECK_FALSE(rb.message.empty());

  ShootingProblem empty;
  const ShootResult re = shoot_sigma2(empty, 1.0);
  CHECK_FALSE(re.converged);
}

TEST_CASE("tabulated uniform sphere through Structure: Sterne's values at any h") {
  // Sterne 1937 (MNRAS 97, 582) again, now from a table. The shooting solves the continuous
  // problem of the interpolated structure; the structure's cubic Hermite interpolation (slopes
  // from hydrostatic equilibrium and dm/dr = 4 pi r^2 rho, see structure.hpp) reproduces the
  // uniform sphere's P (quadratic) and m (cubic) exactly, so both tables give the closed form
  // to the integration tolerance: the table spacing no longer matters.
  const double gamma1 = 5.0 / 3.0;
  const StellarModel coarse = test::uniform_sphere(test::uniform_mesh(1600), gamma1);
  const StellarModel fine = test::uniform_sphere(test::uniform_mesh(3200), gamma1);
  const double unit = constants::G * fine.mass() / std::pow(fine.radius(), 3);
  for (int k = 0; k < 5; ++k) {
    const double exact = sterne(gamma1, k) * unit;
    const ShootResult rc = shoot_mode(coarse, exact * 1.01);
    const ShootResult rf = shoot_mode(fine, exact * 1.01);
    CAPTURE(k);
    CAPTURE(rf.message);
    REQUIRE(rc.converged);
    REQUIRE(rf.converged);
    CHECK(rc.nodes == k);
    CHECK(rf.nodes == k);
    const double ec = std::abs(rc.omega2 - exact), ef = std::abs(rf.omega2 - exact);
    CAPTURE(ec / exact);
    CAPTURE(ef / exact);
    CHECK(ec < 1e-9 * exact);
    CHECK(ef < 1e-9 * exact);
    CHECK(rf.error_estimate < 1e-7 * exact);
  }
}

TEST_CASE("tabulated model without a centre row and with a repeated radius") {
  // The structure extends a model starting at r_0 > 0 with a uniform core; for the uniform
  // sphere that is exact, so the answer stays Sterne's. A repeated radius with identical rows
  // on both sides (a "discontinuity" of size zero) must not change anything either.
  const double gamma1 = 1.4;
  std::vector<double> x = test::uniform_mesh(800, 0.0);
  x.erase(x.begin()); // no centre row
  StellarModel model = test::uniform_sphere(x, gamma1);
  const double unit = constants::G * model.mass() / std::pow(model.radius(), 3);
  const ShootResult plain = shoot_mode(model, 9.5 * unit);
  REQUIRE(plain.converged);
  CHECK(plain.nodes == 1);
  CHECK(plain.omega2 == doctest::Approx(sterne(gamma1, 1) * unit).epsilon(3e-4));

  // Duplicate row 400 (r/R = 0.5).
  StellarModel split = model;
  auto dup = [](std::vector<double>& v, std::size_t i) {
    v.insert(v.begin() + static_cast<std::ptrdiff_t>(i), v[i]);
  };
  for (auto* v : {&split.r, &split.m, &split.P, &split.rho, &split.gamma1}) dup(*v, 399);
  const ShootingProblem p = shooting_problem(split);
  // Every interior node is a break; the repeated radius gives one node, not two.
  REQUIRE(p.breaks.size() == 799); // 800 rows + centre row + duplicate = 801 nodes
  const auto at_half = static_cast<std::size_t>(
      std::lower_bound(p.breaks.begin(), p.breaks.end(), 0.5 - 1e-12) - p.breaks.begin());
  REQUIRE(at_half + 1 < p.breaks.size());
  CHECK(p.breaks[at_half] == doctest::Approx(0.5).epsilon(1e-14));
  CHECK(p.breaks[at_half + 1] > 0.5 + 1e-4);
  const ShootResult r = shoot_mode(split, 9.5 * unit);
  REQUIRE(r.converged);
  CHECK(r.nodes == 1);
  CHECK(r.omega2 == doctest::Approx(plain.omega2).epsilon(1e-9));
  for (std::size_t j = 0; j < p.pressure_jump.size(); ++j) CHECK(p.pressure_jump[j] == 1.0);

  // A pressure that differs between the two rows of the repeated radius is carried as a jump
  // of p = delta P/P (delta P continuous): p_out = p_in * P_in/P_out.
  StellarModel jump = split;
  jump.P[400] *= 0.99; // the row that starts the outer interval
  const ShootingProblem pj = shooting_problem(jump);
  CHECK(pj.pressure_jump[at_half] == doctest::Approx(1.0 / 0.99).epsilon(1e-14));
  CHECK(pj.pressure_jump[at_half - 1] == 1.0);
}

TEST_CASE("verify_modes compares a ModeSet by shooting") {
  // A hand-made ModeSet with the closed-form eigenvalues of a tabulated uniform sphere
  // (Sterne 1937) and honest error estimates agrees; one with a wrong value does not.
  const double gamma1 = 5.0 / 3.0;
  const StellarModel model = test::uniform_sphere(test::uniform_mesh(1000), gamma1);
  const double unit = constants::G * model.mass() / std::pow(model.radius(), 3);
  ModeSet set;
  for (int k = 0; k < 3; ++k) {
    ModeSolution m;
    m.order = k;
    m.nodes = k;
    m.omega2 = sterne(gamma1, k) * unit;
    m.error_estimate = 1e-4 * m.omega2; // covers the O(h^2) table interpolation error
    set.modes.push_back(m);
  }
  ModeSet wrong = set;
  wrong.modes[1].omega2 *= 1.01;
  wrong.modes[2].order = 3; // order that the node count contradicts
  const auto ok = verify_modes(model, set);
  REQUIRE(ok.size() == 3);
  for (const auto& v : ok) {
    CAPTURE(v.order);
    CAPTURE(v.shoot.message);
    CHECK(v.shoot.converged);
    CHECK(v.nodes_agree);
    CHECK(v.agrees);
    CHECK(v.rel_diff < 1e-4);
  }
  const auto bad = verify_modes(model, wrong);
  REQUIRE(bad.size() == 3);
  CHECK(bad[0].agrees);
  CHECK_FALSE(bad[1].agrees); // 1 % off, far outside 3 x (1e-4 + shooting estimate)
  CHECK(bad[1].rel_diff == doctest::Approx(0.01 / 1.01).epsilon(1e-3));
  CHECK_FALSE(bad[2].nodes_agree);
  CHECK_FALSE(bad[2].agrees);
}

TEST_CASE("finite elements against shooting: polytropes n = 1.5 and 3, first five modes") {
  // Two independent solutions of the same interpolated model (structure.hpp): Galerkin finite
  // elements with Richardson extrapolation (eigensolve.hpp) and shooting. They must agree to
  // the combined error estimates, and the shooting's node count must equal the FE order.
  // The check is also made without the FE estimate's share for interpolation between table
  // rows (ModeSolution::interpolation_error), which both methods see identically.
  for (double n : {1.5, 3.0}) {
    GeneratorOptions g;
    g.points = 1000;
    const StellarModel model = make_polytrope(n, g);
    const ModeSet set = solve_modes(model); // 5 modes, regular surface, centre
    REQUIRE(set.status == SolveStatus::ok);
    REQUIRE(set.modes.size() == 5);
    const std::vector<VerifyResult> check = verify_modes(model, set);
    REQUIRE(check.size() == 5);
    for (std::size_t k = 0; k < check.size(); ++k) {
      const VerifyResult& v = check[k];
      const ModeSolution& fe = set.modes[k];
      CAPTURE(n);
      CAPTURE(k);
      CAPTURE(v.shoot.message);
      CAPTURE(v.rel_diff);
      CAPTURE(fe.error_estimate / std::abs(fe.omega2));
      CAPTURE(v.shoot.error_estimate / std::abs(fe.omega2));
      CHECK(fe.order == static_cast<int>(k));
      CHECK(v.shoot.converged);
      CHECK(v.shoot.nodes == static_cast<int>(k));
      CHECK(v.nodes_agree);
      CHECK(v.agrees);
      const double discretization_only = fe.error_estimate - fe.interpolation_error;
      CHECK(v.abs_diff <= 3.0 * (discretization_only + v.shoot.error_estimate));
      // Not a trivially wide window: the combined estimate is a small fraction of omega^2.
      CHECK(v.tolerance < 1e-3 * std::abs(fe.omega2));
      // The FE estimate is that of the fine-mesh value; the extrapolated value is far better
      // (measured at 1000 points: |FE - shooting| between 1e-11 and 2e-4 of the estimate).
      CHECK(v.abs_diff < 1e-2 * fe.error_estimate);
    }
  }
}

TEST_CASE("finite elements against shooting: generated uniform sphere, dynamically unstable") {
  // Gamma1 = 1.3: omega_0^2 = (3 Gamma1 - 4) GM/R^3 < 0 (Ledoux; Sterne 1937). Both methods
  // must find the negative fundamental and agree with each other and with the closed form.
  GeneratorOptions g;
  g.points = 400;
  g.gamma1 = 1.3;
  const StellarModel model = make_uniform(g);
  SolveOptions so;
  so.count = 3;
  const ModeSet set = solve_modes(model, so);
  REQUIRE(set.modes.size() == 3);
  const auto check = verify_modes(model, set);
  const double unit = constants::G * model.mass() / std::pow(model.radius(), 3);
  for (std::size_t k = 0; k < check.size(); ++k) {
    CAPTURE(k);
    CAPTURE(check[k].shoot.message);
    CHECK(check[k].agrees);
    CHECK(check[k].omega2_shoot ==
          doctest::Approx(sterne(1.3, static_cast<int>(k)) * unit).epsilon(1e-7));
  }
  CHECK(check[0].omega2_shoot < 0.0);
}

TEST_CASE("Gamma1 discontinuity in a uniform sphere: table-independent shooting, FE agrees") {
  // Uniform sphere with Gamma1 = 5/3 inside r = R/2 and 1.4 outside (a repeated row at R/2).
  // P, rho and m are reproduced exactly by the structure's interpolation (structure.hpp), so the
  // shooting eigenvalue must not depend on the table spacing. Variational bound (physics.md
  // section 4: K[xi] grows with Gamma1 at every r, so every eigenvalue does): each sigma_k^2
  // lies strictly between Sterne's values (Sterne 1937) for Gamma1 = 1.4 and 5/3.
  auto model_with = [](std::size_t intervals) {
    const std::vector<double> x = test::uniform_mesh(intervals);
    const auto half = static_cast<std::size_t>(
        std::lower_bound(x.begin(), x.end(), 0.5 - 1e-12) - x.begin());
    StellarModel m = test::uniform_sphere(x, 5.0 / 3.0);
    for (auto* v : {&m.r, &m.m, &m.P, &m.rho, &m.gamma1})
      v->insert(v->begin() + static_cast<std::ptrdiff_t>(half), (*v)[half]);
    for (std::size_t j = half + 1; j < m.gamma1.size(); ++j) m.gamma1[j] = 1.4;
    return m;
  };
  const StellarModel coarse = model_with(200);
  const StellarModel fine = model_with(400);
  const double unit = constants::G * fine.mass() / std::pow(fine.radius(), 3);
  SolveOptions so;
  so.count = 4;
  const ModeSet set = solve_modes(fine, so);
  REQUIRE(set.modes.size() == 4);
  const auto check = verify_modes(fine, set);
  for (std::size_t k = 0; k < check.size(); ++k) {
    const int kk = static_cast<int>(k);
    const ShootResult rc = shoot_mode(coarse, set.modes[k].omega2);
    CAPTURE(k);
    CAPTURE(check[k].shoot.message);
    REQUIRE(rc.converged);
    CHECK(check[k].agrees);
    CHECK(rc.nodes == kk);
    CHECK(rc.omega2 == doctest::Approx(check[k].omega2_shoot).epsilon(1e-9));
    const double s2 = check[k].omega2_shoot / unit;
    CHECK(s2 > sterne(1.4, kk));
    CHECK(s2 < sterne(5.0 / 3.0, kk));
  }
}
