// Radial modes by finite elements + shift-invert Lanczos (include/radmode/eigensolve.hpp).
#include "radmode/eigensolve.hpp"

#include "analytic_models.hpp"
#include "radmode/constants.hpp"
#include "radmode/discretize.hpp"
#include "radmode/error.hpp"
#include "radmode/generators.hpp"

#include <doctest/doctest.h>

#include <cmath>

using namespace radmode;

namespace {

/// sigma^2 = omega^2 R^3 / (G M)
double sigma2(const StellarModel& m, double omega2) {
  return omega2 * std::pow(m.radius(), 3) / (constants::G * m.mass());
}

/// solve_modes with `count` modes and otherwise default options.
ModeSet solve_count(const StellarModel& model, int count) {
  SolveOptions opt;
  opt.count = count;
  return solve_modes(model, opt);
}

/// Sterne (1937, MNRAS 97, 582): uniform-density sphere, sigma_k^2 = Gamma1 (k+1)(2k+3) - 4.
double sterne(double gamma1, int k) { return gamma1 * (k + 1) * (2 * k + 3) - 4; }

} // namespace

TEST_CASE("uniform sphere: Sterne's spectrum to 1e-6 for k <= 9") {
  for (const double g1 : {1.4, 5.0 / 3.0, 2.0}) {
    const auto model = test::uniform_sphere(test::uniform_mesh(1999), g1);
    const ModeSet set = solve_count(model, 10);
    REQUIRE(set.status == SolveStatus::ok);
    REQUIRE(set.modes.size() == 10);
    for (int k = 0; k < 10; ++k) {
      const auto& m = set.modes[static_cast<std::size_t>(k)];
      const double exact = sterne(g1, k);
      const double s2 = sigma2(model, m.omega2);
      const double err = std::abs(s2 - exact);
      const double est = sigma2(model, m.error_estimate);
      MESSAGE("Gamma1 " << g1 << " k " << k << " sigma2 " << s2 << " rel err " << err / exact
                        << " fine rel err " << std::abs(sigma2(model, m.omega2_fine) - exact) / exact
                        << " estimate " << est / exact << " interp " << sigma2(model, m.interpolation_error) / exact
                        << " resid " << m.residual << " flag '" << m.flag << "'");
      CHECK(err <= 1e-6 * exact);
      CHECK(m.order == k);
      CHECK(m.nodes == k);
      CHECK(m.order_agrees);
      CHECK(m.trusted);
      CHECK(est >= err);
    }
  }
}

TEST_CASE("uniform sphere: first overtone xi_1 = 1 - (7/5) x^2 and its node at (5/7)^1/2") {
  // Sterne (1937): the first overtone of the uniform sphere has xi ∝ 1 - (7/5)(r/R)^2; with
  // xi(R) = 1 that is (1 - 1.4 x^2) / (-0.4).
  const auto model = test::uniform_sphere(test::uniform_mesh(1999), 5.0 / 3.0);
  const ModeSet set = solve_modes(model);
  REQUIRE(set.modes.size() == 5);
  const auto& m = set.modes[1];
  CHECK(m.xi.back() == 1.0);
  double worst = 0;
  double node = -1;
  for (std::size_t i = 0; i < m.xi.size(); ++i) {
    const double x = set.node_r[i] / model.radius();
    worst = std::max(worst, std::abs(m.xi[i] - (1 - 1.4 * x * x) / -0.4));
    if (i > 0 && m.xi[i - 1] * m.xi[i] < 0) {
      const double x0 = set.node_r[i - 1] / model.radius();
      node = x0 + (x - x0) * m.xi[i - 1] / (m.xi[i - 1] - m.xi[i]);
    }
  }
  MESSAGE("max |xi_1 - analytic| = " << worst << ", node at " << node);
  CHECK(worst < 1e-5);
  CHECK(node == doctest::Approx(std::sqrt(5.0 / 7.0)).epsilon(1e-6));
}

TEST_CASE("Gamma1 = 4/3: marginal fundamental, omega0^2 = 0 within its estimate, flat xi_0") {
  // Analytic (physics.md §5): Gamma1 = 4/3 everywhere gives xi = const with omega0^2 = 0.
  const auto model = test::uniform_sphere(test::uniform_mesh(1999), 4.0 / 3.0);
  const ModeSet set = solve_modes(model);
  REQUIRE(set.status == SolveStatus::ok);
  const auto& f = set.modes[0];
  const double s2 = sigma2(model, f.omega2), est = sigma2(model, f.error_estimate);
  MESSAGE("sigma0^2 = " << s2 << ", estimate " << est);
  CHECK(std::abs(s2) <= std::max(est, 1e-10));
  CHECK(std::abs(s2) < 1e-8);
  CHECK(f.order == 0);
  CHECK(f.nodes == 0);
  double flat = 0;
  for (const double v : f.xi) flat = std::max(flat, std::abs(v - 1.0));
  CHECK(flat < 1e-6);
  // and the overtones follow Sterne with Gamma1 = 4/3
  CHECK(sigma2(model, set.modes[1].omega2) == doctest::Approx(sterne(4.0 / 3.0, 1)).epsilon(1e-8));
}

TEST_CASE("an unstable uniform sphere (Gamma1 = 1.3) has omega0^2 = 3 Gamma1 - 4 < 0") {
  // Classical (Ledoux; Sterne 1937): omega0^2 = (3 Gamma1 - 4) G M / R^3.
  const auto model = test::uniform_sphere(test::uniform_mesh(999), 1.3);
  const ModeSet set = solve_modes(model);
  REQUIRE(set.status == SolveStatus::ok);
  CHECK(sigma2(model, set.modes[0].omega2) == doctest::Approx(3 * 1.3 - 4).epsilon(1e-7));
  CHECK(set.modes[0].order == 0);
  CHECK(set.modes[0].trusted);
  CHECK(sigma2(model, set.modes[1].omega2) == doctest::Approx(sterne(1.3, 1)).epsilon(1e-7));
}

TEST_CASE("node count equals the inertia order up to k = 50; 100 modes work") {
  const auto model = test::uniform_sphere(test::uniform_mesh(1999), 5.0 / 3.0);
  const ModeSet set = solve_count(model, 100);
  REQUIRE(set.status == SolveStatus::ok);
  REQUIRE(set.modes.size() == 100);
  MESSAGE("solver message: " << (set.message.empty() ? "(none)" : set.message));
  int disagree = 0, untrusted = 0;
  for (int k = 0; k < 100; ++k) {
    const auto& m = set.modes[static_cast<std::size_t>(k)];
    CHECK(m.order == k);
    CHECK(m.inertia_multiplicity == 1);
    if (k <= 50) CHECK(m.nodes == k);
    if (!m.order_agrees) ++disagree;
    if (!m.trusted) ++untrusted;
    if (k > 0) CHECK(m.omega2 > set.modes[static_cast<std::size_t>(k - 1)].omega2);
  }
  MESSAGE("100 modes: " << disagree << " with node count != order, " << untrusted
                        << " not trusted; sigma_99^2 = " << sigma2(model, set.modes[99].omega2)
                        << " (Sterne " << sterne(5.0 / 3.0, 99) << ")");
  CHECK(disagree == 0);
}

TEST_CASE("100 modes when the every-other-node mesh is itself the coarsest mesh") {
  // 1,000 points: the every-other-node mesh (500 unknowns) is too small to coarsen further
  // for 100 modes, so it is solved directly and its eigenvectors start the model mesh. The
  // orders must come out right; Sterne (1937) for the values, node count = order (common
  // practice: Sturm-Liouville).
  const auto model = test::uniform_sphere(test::uniform_mesh(1000), 5.0 / 3.0);
  const ModeSet set = solve_count(model, 100);
  REQUIRE(set.status == SolveStatus::ok);
  REQUIRE(set.modes.size() == 100);
  MESSAGE("solver message: " << (set.message.empty() ? "(none)" : set.message));
  // The eigenvectors of that mesh must reach the model mesh: a few of the highest modes may
  // need the bisection fallback, not all (as when the start vectors were once lost).
  const auto at = set.message.find(" eigenvalue(s) recovered");
  const int recovered = at == std::string::npos ? 0 : std::stoi(set.message.substr(0, at));
  CHECK(recovered < 20);
  for (int k = 0; k < 100; ++k) CHECK(set.modes[static_cast<std::size_t>(k)].order == k);
  for (int k = 0; k <= 20; ++k) {
    CHECK(set.modes[static_cast<std::size_t>(k)].nodes == k);
    CHECK(sigma2(model, set.modes[static_cast<std::size_t>(k)].omega2) ==
          doctest::Approx(sterne(5.0 / 3.0, k)).epsilon(1e-3));
  }
}

TEST_CASE("observed convergence order of the unextrapolated omega^2 is about 2") {
  std::vector<double> err;
  const std::vector<std::size_t> sizes = {250, 500, 1000, 2000};
  for (const std::size_t n : sizes) {
    const auto model = test::uniform_sphere(test::uniform_mesh(n), 5.0 / 3.0);
    SolveOptions opt;
    opt.count = 4;
    opt.richardson = false;
    const ModeSet set = solve_modes(model, opt);
    REQUIRE(set.modes.size() == 4);
    CHECK(set.modes[3].omega2 == set.modes[3].omega2_fine);
    err.push_back(std::abs(sigma2(model, set.modes[3].omega2) - sterne(5.0 / 3.0, 3)));
  }
  for (std::size_t i = 1; i < err.size(); ++i) {
    const double order = std::log2(err[i - 1] / err[i]);
    MESSAGE("k = 3, N " << sizes[i - 1] << " -> " << sizes[i] << ": observed order " << order);
    CHECK(order == doctest::Approx(2.0).epsilon(0.03));
  }
}

TEST_CASE("window mode returns exactly the modes inside") {
  const auto model = test::uniform_sphere(test::uniform_mesh(1999), 5.0 / 3.0);
  const double unit = constants::G * model.mass() / std::pow(model.radius(), 3);
  SolveOptions opt;
  // (sigma_2^2 + sigma_3^2)/2 .. (sigma_7^2 + sigma_8^2)/2: modes 3..7.
  opt.window_lo_omega2 = 0.5 * (sterne(5.0 / 3.0, 2) + sterne(5.0 / 3.0, 3)) * unit;
  opt.window_hi_omega2 = 0.5 * (sterne(5.0 / 3.0, 7) + sterne(5.0 / 3.0, 8)) * unit;
  const ModeSet set = solve_modes(model, opt);
  REQUIRE(set.status == SolveStatus::ok);
  REQUIRE(set.modes.size() == 5);
  for (int i = 0; i < 5; ++i) {
    const auto& m = set.modes[static_cast<std::size_t>(i)];
    CHECK(m.order == i + 3);
    CHECK(m.order_agrees);
    CHECK(m.omega2 >= *opt.window_lo_omega2);
    CHECK(m.omega2 <= *opt.window_hi_omega2);
    CHECK(sigma2(model, m.omega2) == doctest::Approx(sterne(5.0 / 3.0, i + 3)).epsilon(1e-6));
  }
  // A window between two eigenvalues holds none; a window holding only sigma_0^2 = 1.
  opt.window_lo_omega2 = 1.5 * unit;
  opt.window_hi_omega2 = 12 * unit;
  CHECK(solve_modes(model, opt).modes.empty());
  opt.window_lo_omega2 = -5 * unit;
  opt.window_hi_omega2 = 12 * unit;
  const ModeSet one = solve_modes(model, opt);
  REQUIRE(one.modes.size() == 1);
  CHECK(one.modes[0].order == 0);
}

TEST_CASE("rigid inner boundary on an envelope: xi = 0 there, orders agree, above the sphere") {
  // The envelope x0 <= x <= 1 of the uniform sphere with xi(x0) = 0: its admissible functions
  // (extended by xi = 0 inside x0) form a subspace of the whole sphere's, so by the
  // Courant–Fischer min-max principle each omega_k^2 is at least the sphere's Sterne value.
  const auto model = test::uniform_sphere(test::uniform_mesh(1999, 0.3), 5.0 / 3.0);
  SolveOptions opt;
  opt.inner = InnerCondition::rigid;
  const ModeSet set = solve_modes(model, opt);
  REQUIRE(set.status == SolveStatus::ok);
  REQUIRE(set.modes.size() == 5);
  CHECK(set.node_r.front() == model.r.front());
  // The same envelope at 4x the resolution: a much finer model as the reference.
  const auto fine_model = test::uniform_sphere(test::uniform_mesh(7999, 0.3), 5.0 / 3.0);
  const ModeSet ref = solve_modes(fine_model, opt);
  for (int k = 0; k < 5; ++k) {
    const auto& m = set.modes[static_cast<std::size_t>(k)];
    CHECK(m.xi.front() == 0.0);
    CHECK(m.order == k);
    CHECK(m.nodes == k);
    CHECK(m.trusted);
    CHECK(sigma2(model, m.omega2) > sterne(5.0 / 3.0, k));
    const double diff = std::abs(m.omega2 - ref.modes[static_cast<std::size_t>(k)].omega2);
    CHECK(diff <= m.error_estimate);
    MESSAGE("rigid envelope k " << k << ": sigma^2 " << sigma2(model, m.omega2) << " vs sphere "
                                << sterne(5.0 / 3.0, k) << "; vs 4x finer " << diff / m.omega2);
  }
}

TEST_CASE("without eigenfunctions: the same modes, errors and flags, no xi") {
  // (What `radmode track` asks for: everything but the copy of xi.) Centre and rigid inner
  // node (node list starting at 1), an unstable model (xi(R) normalization unaffected).
  for (const bool rigid : {false, true}) {
    const auto model = test::uniform_sphere(test::uniform_mesh(999, rigid ? 0.3 : 0.0), rigid ? 5.0 / 3.0 : 1.3);
    SolveOptions with;
    with.inner = rigid ? InnerCondition::rigid : InnerCondition::centre;
    SolveOptions without = with;
    without.eigenfunctions = false;
    const ModeSet a = solve_modes(model, with), b = solve_modes(model, without);
    REQUIRE(a.modes.size() == 5);
    REQUIRE(b.modes.size() == 5);
    CHECK(b.node_r.empty());
    CHECK(a.node_r.size() == model.size());
    for (std::size_t k = 0; k < 5; ++k) {
      const ModeSolution &x = a.modes[k], &y = b.modes[k];
      CHECK(y.xi.empty());
      CHECK(x.xi.size() == model.size());
      CHECK(x.xi.back() == 1.0); // normalized to xi(R) = 1
      CHECK(x.omega2 == y.omega2);
      CHECK(x.error_estimate == y.error_estimate);
      CHECK(x.order == y.order);
      CHECK(x.nodes == y.nodes);
      CHECK(x.trusted == y.trusted);
      CHECK(x.flag == y.flag);
    }
  }
}

TEST_CASE("surface conditions: the natural condition of each form holds at R") {
  // A uniform sphere cut at x = 0.9 keeps P_s = 0.19 P_c > 0. With fixed_pressure the
  // eigenfunctions must have delta P / P = p = -Gamma1 (3 xi + x xi') = 0 at the surface; with
  // the regular condition p = -(4 + sigma^2) xi (physics.md §3). The finite-element solution
  // meets a natural condition to O(h): checked from the last element's slope.
  const double g1 = 5.0 / 3.0;
  auto model = test::uniform_sphere(test::uniform_mesh(3999, 0.0), g1);
  {
    auto cut = model;
    const std::size_t keep = 3601; // x = 0.9
    for (auto* v : {&cut.r, &cut.m, &cut.P, &cut.rho, &cut.gamma1}) v->resize(keep);
    model = cut;
  }
  REQUIRE(model.surface_pressure() > 0);
  for (const auto cond : {SurfaceCondition::fixed_pressure, SurfaceCondition::regular}) {
    SolveOptions opt;
    opt.surface = cond;
    opt.count = 3;
    const ModeSet set = solve_modes(model, opt);
    REQUIRE(set.status == SolveStatus::ok);
    for (const auto& m : set.modes) {
      CHECK(m.order_agrees);
      const std::size_t n = m.xi.size();
      const double h = set.node_r[n - 1] - set.node_r[n - 2];
      const double p_s = -g1 * (3 * m.xi[n - 1] + set.node_r[n - 1] * (m.xi[n - 1] - m.xi[n - 2]) / h);
      const double s2 = sigma2(model, m.omega2);
      const double expect = cond == SurfaceCondition::regular ? -(4 + s2) * m.xi[n - 1] : 0.0;
      MESSAGE(std::string(cond == SurfaceCondition::regular ? "regular" : "fixed_pressure")
              << " k " << m.order << " sigma^2 " << s2 << " p(R) " << p_s << " expected " << expect);
      CHECK(std::abs(p_s - expect) < 2e-2 * (4 + std::abs(s2)));
    }
    // Exact case: xi = const with sigma^2 = 3 Gamma1 - 4 solves the wave equation of the
    // uniform sphere everywhere and meets the regular condition at any radius, so the cut
    // sphere keeps it as its fundamental (in units of its own M and R: G M/R^3 = 4 pi G rho/3).
    if (cond == SurfaceCondition::regular)
      CHECK(sigma2(model, set.modes[0].omega2) == doctest::Approx(3 * g1 - 4).epsilon(1e-9));
  }
}

TEST_CASE("fixed_pressure and regular agree when the surface pressure is zero") {
  // physics.md §4: both surface terms vanish with P_s = 0.
  const auto model = test::uniform_sphere(test::uniform_mesh(999), 5.0 / 3.0);
  SolveOptions a, b;
  b.surface = SurfaceCondition::fixed_pressure;
  const ModeSet sa = solve_modes(model, a), sb = solve_modes(model, b);
  for (std::size_t k = 0; k < 5; ++k) CHECK(sa.modes[k].omega2 == sb.modes[k].omega2);
}

TEST_CASE("invalid options are rejected with the option named") {
  const auto model = test::uniform_sphere(test::uniform_mesh(99), 5.0 / 3.0);
  SolveOptions opt;
  opt.count = 0;
  CHECK_THROWS_AS(solve_modes(model, opt), UsageError);
  try {
    opt.validate();
  } catch (const UsageError& e) {
    CHECK(std::string(e.what()).find("number of modes") != std::string::npos);
  }
  opt.count = 5;
  opt.window_lo_omega2 = 1.0;
  CHECK_THROWS_AS(opt.validate(), UsageError); // only one end of the window
  opt.window_hi_omega2 = 0.5;
  CHECK_THROWS_AS(opt.validate(), UsageError); // lo > hi
}

TEST_CASE("more modes than the mesh holds: fewer_modes with a message, nothing invented") {
  const auto model = test::uniform_sphere(test::uniform_mesh(20), 5.0 / 3.0);
  const ModeSet set = solve_count(model, 40);
  CHECK(set.status == SolveStatus::fewer_modes);
  CHECK_FALSE(set.message.empty());
  CHECK(set.modes.size() == 21);
}

TEST_CASE("generated uniform sphere (stretched mesh): Sterne's spectrum to 1e-6, k <= 9") {
  // make_uniform's mesh is not uniform (generators.hpp): half spacing at centre and surface.
  for (const double g1 : {1.4, 5.0 / 3.0, 2.0}) {
    GeneratorOptions g;
    g.gamma1 = g1;
    const auto model = make_uniform(g); // 2,000 points by default
    const ModeSet set = solve_count(model, 10);
    REQUIRE(set.status == SolveStatus::ok);
    for (int k = 0; k < 10; ++k) {
      const auto& m = set.modes[static_cast<std::size_t>(k)];
      const double err = std::abs(sigma2(model, m.omega2) - sterne(g1, k));
      CHECK(err <= 1e-6 * sterne(g1, k));
      CHECK(sigma2(model, m.error_estimate) >= err);
      CHECK(m.order_agrees);
      CHECK(m.trusted);
    }
  }
}

TEST_CASE("polytropes n = 1.5 and 3: first five modes within 1e-6 of a much finer model") {
  // Reference: the same polytrope generated with 8x the points (16,000) and solved the same
  // way -- a self-convergence check. The outside check of these eigenvalues (SciPy solve_ivp)
  // is tests/reference/modes_polytrope_scipy.py of the shooting solver.
  for (const double n : {1.5, 3.0}) {
    GeneratorOptions g;
    const auto model = make_polytrope(n, g);
    g.points = 16000;
    const auto reference = make_polytrope(n, g);
    const ModeSet set = solve_modes(model), ref = solve_modes(reference);
    REQUIRE(set.status == SolveStatus::ok);
    REQUIRE(ref.status == SolveStatus::ok);
    for (std::size_t k = 0; k < 5; ++k) {
      const auto& m = set.modes[k];
      const double diff = std::abs(m.omega2 - ref.modes[k].omega2);
      MESSAGE("n = " << n << " k = " << k << ": sigma^2 = " << sigma2(model, m.omega2)
                     << ", relative difference to the 16,000-point model " << diff / ref.modes[k].omega2
                     << ", relative error estimate " << m.error_estimate / m.omega2);
      CHECK(diff <= 1e-6 * ref.modes[k].omega2);
      CHECK(diff <= m.error_estimate);
      CHECK(m.order == static_cast<int>(k));
      CHECK(m.order_agrees);
      CHECK(m.trusted);
    }
  }
}

TEST_CASE("a 200,000-point model: round-off-limited residuals are not flagged, estimates hold") {
  // On fine meshes the residual of even an exact-to-rounding eigenvector sits at the round-off
  // level eps || |K||x| + |w||M||x| || / (...), which grows like N^2 (about 1e-7 here): the
  // residual check compares with that level, not with a fixed 1e-8. The values are checked
  // against the 20,000-point model (self-convergence; the outside check of these eigenvalues
  // is tests/reference/modes_polytrope_scipy.py).
  GeneratorOptions g;
  g.points = 200000;
  const auto fine = make_polytrope(3.0, g);
  g.points = 20000;
  const auto mid = make_polytrope(3.0, g);
  const ModeSet set = solve_modes(fine), ref = solve_modes(mid);
  REQUIRE(set.status == SolveStatus::ok);
  REQUIRE(set.modes.size() == 5);
  for (std::size_t k = 0; k < 5; ++k) {
    const ModeSolution& m = set.modes[k];
    MESSAGE("k = " << k << ": residual " << m.residual << ", round-off level " << m.residual_floor
                   << ", relative error estimate " << m.error_estimate / m.omega2);
    CHECK(m.residual_floor > 1e-8);          // the fixed threshold alone would flag every mode
    CHECK(m.residual <= 10 * m.residual_floor);
    CHECK(m.trusted);
    CHECK(m.order == static_cast<int>(k));
    const double diff = std::abs(m.omega2 - ref.modes[k].omega2);
    CHECK(diff <= m.error_estimate + ref.modes[k].error_estimate);
    CHECK(m.error_estimate <= 1e-6 * m.omega2); // statistical, not worst-case, round-off term
  }
}

TEST_CASE("the nested solve does O(N) work: iteration work per row and mode is the same at every size") {
  // The operation count of the solve, not its time (a timed test would measure the machine):
  // every Rayleigh quotient step costs O(rows) per vector, so rows x vectors summed over all
  // steps on all meshes (PencilSpectrum::iteration_work) divided by N x count must not grow
  // with N. The meshes halve, so one step per mesh gives about 2 (a geometric series), plus
  // the extra steps of the two meshes whose eigenvalues are verified.
  std::vector<double> per_row;
  for (const std::size_t n : {2000u, 20000u, 200000u}) {
    GeneratorOptions g;
    g.points = n;
    const TridiagonalPencil p = test::model_pencil(make_polytrope(3.0, g));
    PencilRequest req;
    req.count = 10;
    const PencilSpectrum sp = solve_pencil(p, req);
    REQUIRE(sp.status == SolveStatus::ok);
    REQUIRE(sp.pairs.size() == 10);
    for (int k = 0; k < 10; ++k) CHECK(sp.pairs[static_cast<std::size_t>(k)].index == k);
    per_row.push_back(static_cast<double>(sp.iteration_work) / (static_cast<double>(p.size()) * 10.0));
    MESSAGE(n << " points: iteration work " << sp.iteration_work << " = " << per_row.back()
              << " x rows x modes");
  }
  for (const double w : per_row) {
    CHECK(w > 0.5);
    CHECK(w < 6.0);
  }
  CHECK(per_row[2] < 1.5 * per_row[0]);
  CHECK(per_row[1] < 1.5 * per_row[0]);
}

TEST_CASE("the crowded flag: set exactly when a neighbouring eigenvalue lies within ten error estimates") {
  // The rule documented in eigensolve.hpp, checked against the eigenvalues themselves: each
  // mode's neighbours are taken from a solve of one more mode (so the highest requested mode
  // has its upper neighbour too). Coarse models, where the error estimates of the higher
  // modes exceed their spacing, and finer ones, where they do not; the ends of a set are
  // decided by inertia counts or by the guard counts taken with the verification.
  const std::string flag = "error estimate large relative to the mode spacing";
  int flagged = 0, clear = 0;
  for (const auto& sizes : {std::pair{120, 20}, std::pair{400, 12}, std::pair{2000, 5}}) {
    const int points = sizes.first, count = sizes.second; // (INFO captures them)
    GeneratorOptions g;
    g.points = static_cast<std::size_t>(points);
    const StellarModel model = make_polytrope(3.0, g);
    SolveOptions options;
    options.count = count;
    const ModeSet set = solve_modes(model, options);
    options.count = count + 1;
    const ModeSet more = solve_modes(model, options);
    REQUIRE(set.modes.size() == static_cast<std::size_t>(count));
    REQUIRE(more.modes.size() == static_cast<std::size_t>(count + 1));
    for (std::size_t k = 0; k < set.modes.size(); ++k) {
      const ModeSolution& m = set.modes[k];
      REQUIRE(m.order == static_cast<int>(k));
      const double reach = 10 * m.error_estimate;
      const double below = k > 0 ? m.omega2_fine - set.modes[k - 1].omega2_fine : HUGE_VAL;
      const double above = more.modes[k + 1].omega2_fine - m.omega2_fine;
      const double closest = std::min(below, above);
      if (std::abs(closest - reach) <= 1e-9 * reach) continue; // too close to call
      INFO("points " << points << ", mode " << k);
      const bool crowded = m.flag.find(flag) != std::string::npos;
      CHECK(crowded == (closest <= reach));
      ++(crowded ? flagged : clear);
    }
  }
  CHECK(flagged > 5); // both outcomes occur
  CHECK(clear > 5);
}
