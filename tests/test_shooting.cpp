// Tests of the shooting solver (shooting.hpp) against closed-form results.
#include "radmode/error.hpp"
#include "radmode/shooting.hpp"

#include <doctest/doctest.h>

#include <cmath>
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

TEST_CASE("density discontinuity: the integration restarts with the other side's coefficients") {
  // Uniform sphere split at x = 0.6 into two segments with identical coefficients: the answer
  // must not change (the restart itself must be exact).
  ShootingProblem p = uniform_sphere(5.0 / 3.0);
  p.interfaces = {0.6};
  int calls_outer = 0, wrong_side = 0;
  const auto base = p.coefficients;
  p.coefficients = [base, &calls_outer, &wrong_side](double x, std::size_t seg) {
    if (seg == 1) ++calls_outer;
    if ((seg == 1 && x < 0.6) || (seg == 0 && x > 0.6) || seg > 1) ++wrong_side;
    return base(x, seg);
  };
  const ShootResult r = shoot_sigma2(p, 31.5);
  REQUIRE(r.converged);
  CHECK(calls_outer > 0);
  CHECK(wrong_side == 0);
  CHECK(r.nodes == 2);
  CHECK(r.sigma2 == doctest::Approx(31.0).epsilon(1e-8));
}

TEST_CASE("fixed surface pressure on a model with P_s > 0, and a rigid inner boundary") {
  // The uniform sphere truncated at 0.9 of its radius, rescaled to radius 1 (P_s > 0):
  // q = x^3 still and V(x) = 2 y^2/(1 - y^2) with y = 0.9 x.
  ShootingProblem p;
  p.x_surface = 1.0;
  p.singular_surface = false;
  p.coefficients = [](double x, std::size_t) {
    const double y = 0.9 * x;
    return LaweCoefficients{2.0 * y * y / (1.0 - y * y), 5.0 / 3.0, 1.0};
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
    return LaweCoefficients{std::nan(""), 5.0 / 3.0, 1.0};
  };
  const ShootResult rb = shoot_sigma2(bad, 1.0);
  CHECK_FALSE(rb.converged);
  CHECK_FALSE(rb.message.empty());

  ShootingProblem empty;
  const ShootResult re = shoot_sigma2(empty, 1.0);
  CHECK_FALSE(re.converged);
}
