// Finite-element assembly, inertia counts and the generic pencil solver
// (include/radmode/discretize.hpp, solve_pencil in include/radmode/eigensolve.hpp).
#include "radmode/discretize.hpp"

#include "analytic_models.hpp"
#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/generators.hpp"

#include <Eigen/Dense>
#include <doctest/doctest.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <utility>

using namespace radmode;

namespace {

std::vector<double> linspace(double a, double b, std::size_t intervals) {
  std::vector<double> x(intervals + 1);
  for (std::size_t i = 0; i <= intervals; ++i)
    x[i] = a + (b - a) * static_cast<double>(i) / static_cast<double>(intervals);
  x.back() = b;
  return x;
}

/// Legendre's equation -((1 - x^2) y')' = lambda y on (-1, 1): a singular Sturm–Liouville
/// problem (p vanishes at both ends) whose bounded solutions are the Legendre polynomials,
/// lambda_k = k (k + 1) (e.g. Abramowitz & Stegun ch. 8; Courant & Hilbert vol. I, ch. V).
/// Its natural (free) end conditions are exactly the boundedness conditions.
WeakForm legendre_form(std::size_t intervals) {
  return sample_form(linspace(-1, 1, intervals), [](std::size_t, double, double x) {
    FormCoefficients c;
    c.a = 1 - x * x;
    c.d = 1;
    return c;
  });
}

Eigen::MatrixXd dense(const std::vector<double>& diag, const std::vector<double>& off) {
  const auto n = static_cast<Eigen::Index>(diag.size());
  Eigen::MatrixXd a = Eigen::MatrixXd::Zero(n, n);
  for (Eigen::Index j = 0; j < n; ++j) {
    a(j, j) = diag[static_cast<std::size_t>(j)];
    if (j + 1 < n) a(j, j + 1) = a(j + 1, j) = off[static_cast<std::size_t>(j)];
  }
  return a;
}

} // namespace

TEST_CASE("assembly of -u'' = lambda u reproduces the textbook linear-element matrices") {
  // Linear elements on a uniform mesh (common practice): K = (1/h) tridiag(-1, 2, -1),
  // M = (h/6) tridiag(1, 4, 1), end rows halved.
  const std::size_t n = 10;
  const double h = 1.0 / n;
  const auto f = sample_form(linspace(0, 1, n), [](std::size_t, double, double) {
    FormCoefficients c;
    c.a = 1;
    c.d = 1;
    return c;
  });
  const auto p = assemble(f, {all_nodes(f), false, false});
  REQUIRE(p.size() == n + 1);
  for (std::size_t j = 0; j <= n; ++j) {
    const double ends = (j == 0 || j == n) ? 0.5 : 1.0;
    CHECK(p.k_diag[j] == doctest::Approx(2 / h * ends));
    CHECK(p.m_diag[j] == doctest::Approx(4 * h / 6 * ends));
  }
  for (std::size_t j = 0; j < n; ++j) {
    CHECK(p.k_off[j] == doctest::Approx(-1 / h));
    CHECK(p.m_off[j] == doctest::Approx(h / 6));
  }
  // Dirichlet at both ends removes the end unknowns.
  const auto q = assemble(f, {all_nodes(f), true, true});
  CHECK(q.size() == n - 1);
  CHECK(q.node.front() == 1);
  CHECK(q.node.back() == n - 1);
}

TEST_CASE("a coarse element spanning two base intervals sees the same coefficients") {
  // Coefficients that jump between base intervals: the coarse mesh must integrate each half
  // with its own coefficient. For -(a u')' with a = 1 on [0, 0.5] and a = 3 on [0.5, 1], one
  // coarse element [0, 1] has K = (1/h^2) (0.5 * 1 + 0.5 * 3) = 2 in its (0, 0) entry.
  const auto f = sample_form({0.0, 0.5, 1.0}, [](std::size_t i, double, double) {
    FormCoefficients c;
    c.a = i == 0 ? 1.0 : 3.0;
    c.d = 1;
    return c;
  });
  const auto p = assemble(f, {{0, 2}, false, false});
  REQUIRE(p.size() == 2);
  CHECK(p.k_diag[0] == doctest::Approx(2.0));
  CHECK(p.k_off[0] == doctest::Approx(-2.0));
  CHECK(p.m_diag[0] == doctest::Approx(1.0 / 3.0));
}

TEST_CASE("stellar form of the uniform sphere: the analytic coefficients at the Gauss points") {
  // Uniform-density sphere (physics.md §6): in units of M, R and G M^2/R^4, m = x^3,
  // rho = 3/(4 pi), P = (3/(8 pi)) (1 - x^2); the energy form (discretize.hpp) then has
  // a = Gamma1 P x^4, b = 3 Gamma1 P x^3, c = 9 Gamma1 P x^2 - 4 m rho x, d = rho x^4. The
  // cubic interpolation is exact for this model, so the sampled form must match to round-off.
  const double gamma1 = 5.0 / 3.0, pi = 3.14159265358979323846;
  const auto model = test::uniform_sphere(test::uniform_mesh(40, 0.05), gamma1);
  const Structure s(model); // centre extension included
  const WeakForm f = make_stellar_form(s, SurfaceCondition::regular);
  REQUIRE(f.a.size() == 3 * f.interval_count());
  double worst = 0;
  for (std::size_t j = 0; j < f.a.size(); ++j) {
    const std::size_t i = j / 3;
    const double x = f.x[i] + f.t[j] * (f.x[i + 1] - f.x[i]);
    const double P = 3.0 / (8.0 * pi) * (1 - x * x), rho = 3.0 / (4.0 * pi), m = x * x * x;
    const double a = gamma1 * P * std::pow(x, 4), b = 3 * gamma1 * P * std::pow(x, 3);
    const double c = 9 * gamma1 * P * x * x - 4 * m * rho * x, d = rho * std::pow(x, 4);
    const double scale = gamma1 * 3.0 / (8.0 * pi); // largest size of the coefficients
    for (const double e : {f.a[j] - a, f.b[j] - b, f.c[j] - c, f.d[j] - d})
      worst = std::max(worst, std::abs(e) / scale);
  }
  CHECK(worst < 1e-12);
  // Regular surface: P_s = 0 here, so no surface terms.
  CHECK(f.k_last == 0.0);
  CHECK(f.m_last == 0.0);
}

TEST_CASE("form from another structure: its coefficients at the same radii") {
  // The documented meaning of make_stellar_form(s, surface, &other): the coefficients come
  // from other.at_radius(r) at the quadrature radii of s. Checked on an n = 3 polytrope with
  // every other row as `other` (the interpolation-error estimate's use: nested meshes) and
  // with the same polytrope on a different number of points (meshes that do not nest).
  GeneratorOptions g;
  g.points = 300;
  const Structure s(make_polytrope(3.0, g));
  const auto half = every_other_row(s);
  REQUIRE(half.has_value());
  g.points = 217;
  const Structure other(make_polytrope(3.0, g));
  REQUIRE(other.radius() == s.radius());
  for (const Structure* from : {&*half, &other}) {
    const WeakForm f = make_stellar_form(s, SurfaceCondition::regular, from);
    const double R = s.radius(), M = s.mass();
    const double P_unit = constants::G * M * M / (R * R * R * R), rho_unit = M / (R * R * R);
    for (std::size_t j = 0; j < f.a.size(); ++j) {
      const std::size_t i = j / 3;
      const double r = s.node_r()[i] + f.t[j] * (s.node_r()[i + 1] - s.node_r()[i]);
      const StructurePoint p = from->at_radius(r);
      const double x = f.x[i] + f.t[j] * (f.x[i + 1] - f.x[i]);
      const double a = p.gamma1 * p.P / P_unit * std::pow(x, 4);
      const double d = p.rho / rho_unit * std::pow(x, 4);
      CHECK(f.a[j] == doctest::Approx(a).epsilon(1e-13));
      CHECK(f.d[j] == doctest::Approx(d).epsilon(1e-13));
    }
  }
}

namespace {

/// `m` with row k repeated and the density above it halved: a composition discontinuity.
StellarModel with_discontinuity(StellarModel m, std::size_t k) {
  for (auto* v : {&m.r, &m.m, &m.P, &m.rho, &m.gamma1})
    v->insert(v->begin() + static_cast<std::ptrdiff_t>(k) + 1, (*v)[k]);
  for (auto* v : {&m.T, &m.L, &m.nabla_ad, &m.u})
    if (!v->empty()) v->insert(v->begin() + static_cast<std::ptrdiff_t>(k) + 1, (*v)[k]);
  m.extra.clear();
  m.line.clear();
  for (std::size_t j = k + 1; j < m.size(); ++j) m.rho[j] *= 0.5;
  return m;
}

} // namespace

TEST_CASE("every_other_row equals the structure of the same rows prepared from scratch") {
  // every_other_row prepares its subset directly (no second validation); the result must be
  // the one the public constructor gives for the same table. Model with a discontinuity.
  GeneratorOptions g;
  g.points = 101;
  const std::size_t k = 40;
  const StellarModel m = with_discontinuity(make_polytrope(1.5, g), k);
  const Structure s(m);
  REQUIRE(s.discontinuity()[k]);
  CHECK(s.discontinuity_nodes() == flagged_nodes(s.discontinuity()));
  const auto half = every_other_row(s);
  REQUIRE(half.has_value());
  // The same rows, by the documented rule, through the validating constructor.
  StellarModel rows;
  const auto keep = every_other_node(s.interval_count(), s.discontinuity());
  std::size_t node = 0, next = 0;
  for (std::size_t j = 0; j < s.table().size(); ++j) {
    if (j > 0 && s.table().r[j] != s.table().r[j - 1]) ++node;
    while (next < keep.size() && keep[next] < node) ++next;
    if (next < keep.size() && keep[next] == node) {
      rows.r.push_back(s.table().r[j]);
      rows.m.push_back(s.table().m[j]);
      rows.P.push_back(s.table().P[j]);
      rows.rho.push_back(s.table().rho[j]);
      rows.gamma1.push_back(s.table().gamma1[j]);
    }
  }
  const Structure ref(rows);
  REQUIRE(half->node_r() == ref.node_r());
  CHECK(half->discontinuity() == ref.discontinuity());
  CHECK(half->discontinuity_nodes() == ref.discontinuity_nodes());
  for (std::size_t i = 0; i < ref.interval_count(); ++i)
    for (const double t : {0.0, 0.25, 0.5, 0.9, 1.0}) {
      const StructurePoint a = half->at(i, t), b = ref.at(i, t);
      CHECK(a.m == b.m);
      CHECK(a.P == b.P);
      CHECK(a.rho == b.rho);
      CHECK(a.gamma1 == b.gamma1);
      CHECK(a.dP_dr == b.dP_dr);
    }
}

TEST_CASE("Structure::RowSubset: every_other_row's log values, bit for bit") {
  // The interpolation-error estimate evaluates every_other_row's interpolation through
  // RowSubset, which builds only its curves; RowSubset promises log_values_at of
  // every_other_row(s) bit for bit. Cases: polytropes (zero surface density and pressure:
  // the power law and the linear fallbacks), one with a discontinuity, an odd number of
  // intervals, both inner conditions, a uniform sphere with its centre extended.
  GeneratorOptions g;
  std::vector<std::pair<StellarModel, InnerCondition>> cases;
  g.points = 101;
  cases.emplace_back(with_discontinuity(make_polytrope(1.5, g), 40), InnerCondition::centre);
  cases.emplace_back(with_discontinuity(make_polytrope(3.0, g), 41), InnerCondition::rigid);
  g.points = 200;
  cases.emplace_back(make_polytrope(3.0, g), InnerCondition::centre);
  g.points = 57;
  cases.emplace_back(make_polytrope(1.0, g), InnerCondition::rigid);
  cases.emplace_back(test::uniform_sphere(test::uniform_mesh(31, 0.2), 1.4), InnerCondition::centre);
  for (const auto& [model, inner] : cases) {
    const Structure s(model, inner);
    const auto half = every_other_row(s);
    REQUIRE(half.has_value());
    const auto kept = every_other_node_keeping(s.interval_count(), s.discontinuity_nodes());
    const Structure::RowSubset sub(s, kept);
    REQUIRE(sub.interval_count() == half->interval_count());
    CHECK(sub.table_rows() == half->table().size());
    std::vector<std::size_t> iv;
    std::vector<double> t;
    for (std::size_t k = 0; k < sub.interval_count(); ++k)
      for (const double tk : {1e-9, 0.25, 1.0 / 3.0, 0.5, 0.71, 1.0 - 1e-12, 0.0, 1.0}) {
        iv.push_back(k);
        t.push_back(tk);
      }
    std::vector<StructureValues> a(t.size()), b(t.size());
    std::vector<unsigned char> la(t.size()), lb(t.size());
    sub.log_values_at(iv.data(), t.data(), t.size(), a.data(), la.data());
    half->log_values_at(iv.data(), t.data(), t.size(), b.data(), lb.data());
    std::size_t mismatches = 0;
    for (std::size_t p = 0; p < t.size(); ++p) {
      // At the ends a zero surface density is +0 in RowSubset (documented); equal as numbers.
      if (la[p] != lb[p] || a[p].m != b[p].m || a[p].P != b[p].P || a[p].rho != b[p].rho ||
          a[p].gamma1 != b[p].gamma1)
        ++mismatches;
      if (t[p] > 0.0 && t[p] < 1.0 &&
          (std::signbit(a[p].rho) != std::signbit(b[p].rho) ||
           std::signbit(a[p].P) != std::signbit(b[p].P)))
        ++mismatches;
    }
    CHECK(mismatches == 0);
  }
  // A node list other than every other node from 0 to the surface is refused.
  g.points = 40;
  const Structure s(make_polytrope(3.0, g));
  CHECK_THROWS_AS(Structure::RowSubset(s, {0, 2, 2, s.interval_count()}), UsageError);
  CHECK_THROWS_AS(Structure::RowSubset(s, {1, s.interval_count()}), UsageError);
  CHECK_THROWS_AS(Structure::RowSubset(s, {0, 4}), UsageError);
}

TEST_CASE("Dirichlet ends remove exactly the end rows and columns of the free pencil") {
  // Essential (Dirichlet) conditions by elimination (common practice): fixing u = 0 at an end
  // drops that unknown's row and column and changes nothing else; on fine and coarse meshes.
  const auto model = test::uniform_sphere(test::uniform_mesh(31, 0.2), 1.4);
  const Structure s(model, InnerCondition::rigid);
  const WeakForm f = make_stellar_form(s, SurfaceCondition::regular);
  for (const auto& nodes : {all_nodes(f), every_other_node(f)}) {
    const auto free = assemble(f, {nodes, false, false});
    const auto fixed = assemble(f, {nodes, true, true});
    REQUIRE(fixed.size() + 2 == free.size());
    for (std::size_t j = 0; j < fixed.size(); ++j) {
      CHECK(fixed.k_diag[j] == free.k_diag[j + 1]);
      CHECK(fixed.m_diag[j] == free.m_diag[j + 1]);
      CHECK(fixed.node[j] == free.node[j + 1]);
    }
    for (std::size_t j = 0; j + 1 < fixed.size(); ++j) {
      CHECK(fixed.k_off[j] == free.k_off[j + 1]);
      CHECK(fixed.m_off[j] == free.m_off[j + 1]);
    }
  }
}

TEST_CASE("assemble_stellar_form: the pencil of make_stellar_form + assemble, bit for bit") {
  // The fused sampling + assembly on the model mesh promises assemble's numbers exactly (the
  // textbook check of the assembly itself is the -u'' test above). Cases: a polytrope with a
  // density discontinuity and a zero-density surface (power-law shape), an envelope extended
  // to the centre, both surface conditions, the inner node free and removed.
  GeneratorOptions g;
  g.points = 157; // not a multiple of the block of intervals evaluated together
  const StellarModel disc = with_discontinuity(make_polytrope(1.5, g), 60);
  const StellarModel envelope = test::uniform_sphere(test::uniform_mesh(45, 0.3), 1.4);
  for (const StellarModel* model : std::array<const StellarModel*, 2>{&disc, &envelope})
    for (const InnerCondition inner : {InnerCondition::centre, InnerCondition::rigid})
      for (const SurfaceCondition surface : {SurfaceCondition::regular,
                                             SurfaceCondition::fixed_pressure}) {
        const Structure s(*model, inner);
        const bool rigid = inner == InnerCondition::rigid;
        const WeakForm f = make_stellar_form(s, surface);
        const TridiagonalPencil ref = assemble(f, {all_nodes(f), rigid, false});
        const ModelPencil fused = assemble_stellar_form(s, surface, rigid);
        CHECK(fused.x == f.x);
        CHECK(fused.pencil.node == ref.node);
        CHECK(fused.pencil.k_diag == ref.k_diag);
        CHECK(fused.pencil.m_diag == ref.m_diag);
        CHECK(fused.pencil.k_off == ref.k_off);
        CHECK(fused.pencil.m_off == ref.m_off);
      }
}

TEST_CASE("every_other_node keeps the ends and the flagged nodes") {
  CHECK(every_other_node(6) == std::vector<std::size_t>{0, 2, 4, 6});
  CHECK(every_other_node(5) == std::vector<std::size_t>{0, 1, 3, 5});
  std::vector<bool> keep(8, false);
  keep[3] = true;
  CHECK(every_other_node(7, keep) == std::vector<std::size_t>{0, 1, 3, 5, 7});
  keep[3] = false;
  keep[4] = true;
  CHECK(every_other_node(7, keep) == std::vector<std::size_t>{0, 2, 4, 5, 7});
  // The list form gives the same meshes; kept ends and repeated entries change nothing or
  // are refused.
  CHECK(flagged_nodes(keep) == std::vector<std::size_t>{4});
  CHECK(every_other_node_keeping(7, {4}) == every_other_node(7, keep));
  CHECK(every_other_node_keeping(7, {0, 3, 7}) == std::vector<std::size_t>{0, 1, 3, 5, 7});
  CHECK(every_other_node_keeping(9, {2, 5}) == std::vector<std::size_t>{0, 2, 3, 5, 7, 9});
  CHECK_THROWS_AS(every_other_node_keeping(9, {5, 5}), UsageError);
}

TEST_CASE("inertia count equals the number of eigenvalues below the shift (dense check)") {
  // Sylvester's law of inertia, checked against Eigen's dense generalized eigensolver.
  const auto model = test::uniform_sphere(test::uniform_mesh(60), 1.4);
  const Structure s(model);
  const auto p = assemble(make_stellar_form(s, SurfaceCondition::regular),
                          {all_nodes(make_stellar_form(s, SurfaceCondition::regular)), false, false});
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(dense(p.k_diag, p.k_off),
                                                               dense(p.m_diag, p.m_off));
  REQUIRE(es.info() == Eigen::Success);
  const auto& ev = es.eigenvalues();
  for (const double shift : {-1.0, 0.0, 0.3, 5.0, 11.0, 100.0, 1e3, 1e4, 1e5}) {
    int below = 0;
    for (Eigen::Index j = 0; j < ev.size(); ++j) below += ev(j) < shift ? 1 : 0;
    CHECK(inertia_below(p, shift) == below);
  }
}

TEST_CASE("Legendre's equation through the same assembly and solver: lambda_k = k(k+1)") {
  PencilRequest req;
  req.count = 10;
  std::vector<double> err_prev;
  for (const std::size_t n : {std::size_t{1000}, std::size_t{2000}}) {
    const auto f = legendre_form(n);
    const auto p = assemble(f, {all_nodes(f), false, false});
    const auto spec = solve_pencil(p, req);
    REQUIRE(spec.status == SolveStatus::ok);
    REQUIRE(spec.pairs.size() == 10);
    std::vector<double> err;
    for (int k = 0; k < 10; ++k) {
      const auto& e = spec.pairs[static_cast<std::size_t>(k)];
      const double exact = k * (k + 1.0);
      CHECK(e.index == k);
      CHECK(e.multiplicity == 1);
      CHECK(e.residual < 1e-9);
      CHECK(e.lambda == doctest::Approx(exact).epsilon(2e-4).scale(1.0));
      err.push_back(e.lambda - exact); // > 0: Rayleigh–Ritz bounds from above
      // P_k has k sign changes on (-1, 1).
      int changes = 0;
      for (std::size_t j = 1; j < e.x.size(); ++j) changes += (e.x[j - 1] * e.x[j] < 0) ? 1 : 0;
      CHECK(changes == k);
    }
    if (!err_prev.empty())
      for (int k = 2; k < 10; ++k) {
        // Richardson between the two meshes: (4 lambda_2000 - lambda_1000)/3.
        const double lam = k * (k + 1.0) + err[static_cast<std::size_t>(k)];
        const double lam_c = k * (k + 1.0) + err_prev[static_cast<std::size_t>(k)];
        CHECK((4 * lam - lam_c) / 3 == doctest::Approx(k * (k + 1.0)).epsilon(1e-7));
        const double order =
            std::log2(err_prev[static_cast<std::size_t>(k)] / err[static_cast<std::size_t>(k)]);
        MESSAGE("Legendre k = " << k << " observed order " << order);
        CHECK(order == doctest::Approx(2.0).epsilon(0.05));
      }
    err_prev = err;
  }
}

TEST_CASE("eigenvectors are M-orthonormal and satisfy K x = lambda M x") {
  const auto p = test::model_pencil(test::uniform_sphere(test::uniform_mesh(1999), 5.0 / 3.0));
  PencilRequest req;
  req.count = 8;
  const auto spec = solve_pencil(p, req);
  REQUIRE(spec.pairs.size() == 8);
  const Eigen::MatrixXd K = dense(p.k_diag, p.k_off), M = dense(p.m_diag, p.m_off);
  for (std::size_t i = 0; i < 8; ++i) {
    const Eigen::Map<const Eigen::VectorXd> xi(spec.pairs[i].x.data(), static_cast<Eigen::Index>(p.size()));
    const Eigen::VectorXd r = K * xi - spec.pairs[i].lambda * (M * xi);
    CHECK(r.norm() / ((K * xi).norm() + spec.pairs[i].lambda * (M * xi).norm()) < 1e-9);
    for (std::size_t j = 0; j < 8; ++j) {
      const Eigen::Map<const Eigen::VectorXd> xj(spec.pairs[j].x.data(), static_cast<Eigen::Index>(p.size()));
      CHECK(xi.dot(M * xj) == doctest::Approx(i == j ? 1.0 : 0.0).scale(1.0).epsilon(1e-9));
    }
  }
}

TEST_CASE("a window request and a request by index give the same eigenpairs") {
  const auto f = legendre_form(800);
  const auto p = assemble(f, {all_nodes(f), false, false});
  PencilRequest by_index;
  by_index.first = 4;
  by_index.count = 3;
  PencilRequest window;
  window.window_lo = 15;  // lambda_4 = 20 ... lambda_6 = 42
  window.window_hi = 50;
  const auto a = solve_pencil(p, by_index), b = solve_pencil(p, window);
  REQUIRE(a.pairs.size() == 3);
  REQUIRE(b.pairs.size() == 3);
  for (std::size_t i = 0; i < 3; ++i) {
    CHECK(a.pairs[i].index == static_cast<int>(i) + 4);
    CHECK(a.pairs[i].lambda == doctest::Approx(b.pairs[i].lambda).epsilon(1e-12));
  }
}

TEST_CASE("invalid meshes and selections are rejected") {
  auto coef = [](std::size_t, double, double) { return FormCoefficients{1, 0, 0, 1}; };
  CHECK_THROWS_AS(sample_form({0.0, 0.5, 0.5, 1.0}, coef), UsageError);
  CHECK_THROWS_AS(sample_form({0.0}, coef), UsageError);
  CHECK_THROWS_AS(sample_form({0.0, 1.0}, coef, 7), UsageError);
  const auto f = sample_form(linspace(0, 1, 4), coef);
  CHECK_THROWS_AS(assemble(f, {{0, 2, 3}, false, false}), UsageError); // misses the last node
  CHECK_THROWS_AS(assemble(f, {{0, 2, 2, 4}, false, false}), UsageError);
  PencilRequest bad;
  bad.count = 0;
  CHECK_THROWS_AS(solve_pencil(assemble(f, {all_nodes(f), false, false}), bad), UsageError);
}

TEST_CASE("stellar_coefficients_change: the change of the coefficients without cancellation") {
  // Reference: the same coefficients differenced in extended precision (long double), i.e.
  // the product rule d(uv) = du (v + dv) + u dv applied exactly. For a change of 1e-9 the
  // double difference of the coefficients keeps only about 7 digits; the change formula
  // keeps nearly all of them.
  const StellarUnits u{1.0 / 3.0, 1.0 / 7.0, 1.0 / 2.0};
  const StructureValues v{0.8, 2.5, 1.7, 5.0 / 3.0};
  // Tolerance: the reference's own rounding (1e-19 of the values) over the change, and a
  // few ulp of the change; the plain double difference would miss the second case by 100x.
  for (const auto& [rel, tol] : {std::pair{1e-2, 1e-13}, std::pair{1e-9, 1e-9}}) {
    const StructureValues dv{-0.3 * rel * v.m, 0.7 * rel * v.P, -0.4 * rel * v.rho,
                             0.2 * rel * v.gamma1};
    const double x = 0.6;
    const FormCoefficients c = stellar_coefficients_change(v, dv, x, u);
    using L = long double;
    auto coeffs = [&](L m, L P, L rho, L g) {
      const L Pu = P * L(u.inv_P), ru = rho * L(u.inv_rho), mu = m * L(u.inv_M), X = L(x);
      return std::array<L, 4>{g * Pu * X * X * X * X, 3 * g * Pu * X * X * X,
                              9 * g * Pu * X * X - 4 * mu * ru * X, ru * X * X * X * X};
    };
    const auto a = coeffs(L(v.m), L(v.P), L(v.rho), L(v.gamma1));
    const auto b = coeffs(L(v.m) + L(dv.m), L(v.P) + L(dv.P), L(v.rho) + L(dv.rho),
                          L(v.gamma1) + L(dv.gamma1));
    const double got[4] = {c.a, c.b, c.c, c.d};
    for (int k = 0; k < 4; ++k) {
      const double ref = static_cast<double>(b[static_cast<std::size_t>(k)] - a[static_cast<std::size_t>(k)]);
      CHECK(got[k] == doctest::Approx(ref).epsilon(tol));
    }
  }
}
