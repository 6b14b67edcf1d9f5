// The block kernels and the Galerkin coarsening behind the nested solve (src/pencil_block.hpp,
// internal to radmode_core).
#include "../src/pencil_block.hpp"

#include "analytic_models.hpp"
#include "radmode/discretize.hpp"
#include "radmode/eigensolve.hpp"
#include "radmode/generators.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <string>

using namespace radmode;

namespace {

/// -u'' = lambda u on (0, pi), u(0) = u(pi) = 0, linear elements on a uniform mesh of n
/// intervals (h = pi/n). The discrete eigenvalues are known in closed form (common practice
/// for linear elements, e.g. Strang & Fix, "An Analysis of the Finite Element Method", ch. 6;
/// quoted from memory and checked here against the continuous limit (k+1)^2):
///     lambda_k = (6/h^2) (1 - cos((k+1) h)) / (2 + cos((k+1) h)), eigenvector sin((k+1) x_j).
struct Dirichlet {
  std::size_t n;
  WeakForm form;
  TridiagonalPencil pencil;
  explicit Dirichlet(std::size_t intervals) : n(intervals) {
    std::vector<double> x(n + 1);
    for (std::size_t i = 0; i <= n; ++i) x[i] = M_PI * static_cast<double>(i) / static_cast<double>(n);
    form = sample_form(x, [](std::size_t, double, double) {
      FormCoefficients c;
      c.a = 1;
      c.d = 1;
      return c;
    });
    pencil = assemble(form, {all_nodes(form), true, true});
  }
  double exact(int k) const {
    // 1 - cos as 2 sin^2(./2): no cancellation for small angles.
    const double h = M_PI / static_cast<double>(n), c = std::cos((k + 1) * h);
    const double s = std::sin(0.5 * (k + 1) * h);
    return 6.0 / (h * h) * (2 * s * s) / (2 + c);
  }
};

double quotient(const TridiagonalPencil& p, const std::vector<double>& x) {
  double xkx = 0, xmx = 0;
  for (std::size_t j = 0; j < x.size(); ++j) {
    double kx = p.k_diag[j] * x[j], mx = p.m_diag[j] * x[j];
    if (j > 0) kx += p.k_off[j - 1] * x[j - 1], mx += p.m_off[j - 1] * x[j - 1];
    if (j + 1 < x.size()) kx += p.k_off[j] * x[j + 1], mx += p.m_off[j] * x[j + 1];
    xkx += x[j] * kx;
    xmx += x[j] * mx;
  }
  return xkx / xmx;
}

} // namespace

TEST_CASE("the closed-form discrete spectrum is what the inertia counts see") {
  const Dirichlet d(400);
  for (int k : {0, 3, 20, 150}) {
    const double lk = d.exact(k);
    CHECK(lk == doctest::Approx((k + 1.0) * (k + 1.0)).epsilon(0.2)); // continuous limit
    CHECK(inertia_below(d.pencil, lk * (1 - 1e-9)) == k);
    CHECK(inertia_below(d.pencil, lk * (1 + 1e-9)) == k + 1);
  }
}

TEST_CASE("inertia counts for many shifts at once equal the one-shift counts") {
  const Dirichlet d(300);
  std::vector<double> shifts;
  for (int i = 0; i < 23; ++i) shifts.push_back(-5.0 + 3.7 * i * i); // groups of 4, 4, 4, 4, 4, 3
  shifts.push_back(d.exact(7));                                      // on an eigenvalue
  for (std::size_t width = 1; width <= shifts.size(); ++width) {
    const std::vector<double> part(shifts.begin(), shifts.begin() + static_cast<std::ptrdiff_t>(width));
    const std::vector<int> many = detail::inertia_below_many(d.pencil, part);
    REQUIRE(many.size() == width);
    for (std::size_t b = 0; b < width; ++b) CHECK(many[b] == inertia_below(d.pencil, part[b]));
  }
}

TEST_CASE("inertia counts in pairs: identical to the one-shift counts near eigenvalues and at zero pivots") {
  // Shifts within a few ulps of the closed-form eigenvalues (where the count flips), and pencils
  // built so that a pivot is exactly zero (the first row, a middle row, the last row), so that
  // the -1e-300 replacement is taken. Each width 1..8 groups the shifts differently.
  const Dirichlet d(200);
  std::vector<double> shifts{0.0, -1.0};
  for (int k : {0, 1, 2, 17, 100, 198}) {
    const double lk = d.exact(k);
    double below = lk, above = lk;
    shifts.push_back(lk);
    for (int u = 0; u < 4; ++u) {
      below = std::nextafter(below, 0.0);
      above = std::nextafter(above, 1e300);
      shifts.push_back(below);
      shifts.push_back(above);
    }
    shifts.push_back(lk * (1 - 1e-12));
    shifts.push_back(lk * (1 + 1e-12));
  }
  // (Both kernels: from three shifts on, the four-lane one where available.)
  auto check_all = [](const TridiagonalPencil& p, const std::vector<double>& sh) {
    for (const bool wide : {false, true}) {
      for (std::size_t width = 1; width <= 8; ++width) {
        for (std::size_t first = 0; first < sh.size(); first += width) {
          const std::size_t end = std::min(sh.size(), first + width);
          const std::vector<double> part(sh.begin() + static_cast<std::ptrdiff_t>(first),
                                         sh.begin() + static_cast<std::ptrdiff_t>(end));
          detail::use_wide_kernel(wide);
          const std::vector<int> many = detail::inertia_below_many(p, part);
          detail::use_wide_kernel(true);
          REQUIRE(many.size() == part.size());
          for (std::size_t b = 0; b < part.size(); ++b) {
            CAPTURE(wide);
            CAPTURE(part[b]);
            CHECK(many[b] == inertia_below(p, part[b]));
          }
        }
      }
    }
  };
  check_all(d.pencil, shifts);
  // M = I, K tridiagonal with off-diagonals -1. The counts use a twisted factorization
  // (inertia_below): pivots from the top down to row n/2 - 1, from the bottom up to row n/2 + 1,
  // and the twist pivot of row n/2 from both sides. At s = 0: K = diag(1, 1, 2, 3) has top
  // pivots 1, 0 (a zero at row 1); diag(0, 2, 2) a zero top pivot at row 0; diag(1, 2, 1) top
  // 1, bottom 1 and twist 2 - 1 - 1 = 0 (a zero twist pivot).
  for (const std::vector<double>& diag : {std::vector<double>{1, 1, 2, 3}, std::vector<double>{0, 2, 2},
                                          std::vector<double>{1, 2, 1}}) {
    TridiagonalPencil p;
    p.k_diag = diag;
    p.k_off.assign(diag.size() - 1, -1.0);
    p.m_diag.assign(diag.size(), 1.0);
    p.m_off.assign(diag.size() - 1, 0.0);
    for (std::size_t j = 0; j < diag.size(); ++j) p.node.push_back(j);
    check_all(p, {0.0, -0.0, 0.5, 1.0, 2.0, -1.0, 3.0, 0.0, 4.0});
  }
}

TEST_CASE("Rayleigh quotient iteration reaches the closed-form eigenpairs from rough starts") {
  const Dirichlet d(600);
  const std::size_t m = d.pencil.size();
  // Starts: sin((k+1) x) plus 2% of a smooth disturbance; five vectors = chunks of 3 and 2.
  std::vector<std::vector<double>> xs;
  for (int k = 0; k < 5; ++k) {
    std::vector<double> x(m);
    for (std::size_t j = 0; j < m; ++j) {
      const double xj = d.form.x[d.pencil.node[j]];
      x[j] = std::sin((k + 1) * xj) + 0.02 * std::sin(xj) * std::cos(3.3 * xj);
    }
    xs.push_back(x);
  }
  detail::rayleigh_iterate(d.pencil, xs, 2, 6, d.exact(600), 1e-12);
  for (int k = 0; k < 5; ++k) {
    const auto& x = xs[static_cast<std::size_t>(k)];
    // (round-off of the quotient: ~eps lambda_max/lambda_0 ~ 1e-11 for the fundamental)
    CHECK(quotient(d.pencil, x) == doctest::Approx(d.exact(k)).epsilon(1e-10));
    // scaled to x^T M x = 1
    double xmx = 0;
    for (std::size_t j = 0; j < m; ++j) {
      double mx = d.pencil.m_diag[j] * x[j];
      if (j > 0) mx += d.pencil.m_off[j - 1] * x[j - 1];
      if (j + 1 < m) mx += d.pencil.m_off[j] * x[j + 1];
      xmx += x[j] * mx;
    }
    CHECK(xmx == doctest::Approx(1.0).epsilon(1e-12));
  }
}

TEST_CASE("the four-lane and the two-lane Rayleigh kernels agree bit for bit") {
  // rayleigh_iterate takes a four-lane (AVX2) kernel for blocks of 3 to 8 vectors where it can
  // (pencil_block.hpp). Both must give the same vectors and statistics to the last bit, whatever
  // the block width, with and without residuals, first shifts and a prolongation from a
  // coarser mesh, on the pencil of a stellar model (n = 3 polytrope, 801 points).
  GeneratorOptions g;
  g.points = 801;
  const Structure s(make_polytrope(3.0, g));
  const ModelPencil fine = assemble_stellar_form(s, SurfaceCondition::regular, false);
  const std::optional<detail::MeshLevel> coarse = detail::coarsen(
      all_nodes(fine.x.size() - 1), false, fine.pencil, fine.x, s.discontinuity_nodes());
  REQUIRE(coarse);
  MESSAGE("four-lane kernel available here: " << std::string(detail::wide_kernel_available() ? "yes" : "no"));
  auto bits_equal = [](double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; };
  for (const bool prolong : {false, true}) {
    const TridiagonalPencil& start_on = prolong ? coarse->pencil : fine.pencil;
    for (std::size_t count = 1; count <= 8; ++count) {
      std::vector<std::vector<double>> starts;
      std::vector<double> shifts;
      for (std::size_t k = 0; k < count; ++k) {
        std::vector<double> x(start_on.size());
        for (std::size_t j = 0; j < x.size(); ++j) {
          const double xj = fine.x[start_on.node[j]];
          x[j] = std::sin((static_cast<double>(k) + 1) * 3.0 * xj) + 0.1 * xj * xj;
        }
        starts.push_back(x);
        shifts.push_back(k % 2 ? std::nan("") : 0.5 + 4.0 * static_cast<double>(k * k));
      }
      for (const double tol : {0.0, 1e-10}) {
        CAPTURE(prolong);
        CAPTURE(count);
        CAPTURE(tol);
        std::vector<std::vector<double>> two = starts, four = starts;
        const detail::Prolongation up{fine.x, coarse->pencil};
        const detail::Prolongation* from = prolong ? &up : nullptr;
        detail::use_wide_kernel(false);
        const auto st2 = detail::rayleigh_iterate(fine.pencil, two, 2, 4, 1e3, tol, shifts, from);
        detail::use_wide_kernel(true);
        const auto st4 = detail::rayleigh_iterate(fine.pencil, four, 2, 4, 1e3, tol, shifts, from);
        REQUIRE(st2.size() == count);
        for (std::size_t k = 0; k < count; ++k) {
          CHECK(st2[k].steps == st4[k].steps);
          for (const auto field : {&detail::RqiStats::rho, &detail::RqiStats::xmx,
                                   &detail::RqiStats::r_norm, &detail::RqiStats::kx_norm,
                                   &detail::RqiStats::mx_norm, &detail::RqiStats::a_norm})
            CHECK(bits_equal(st2[k].*field, st4[k].*field));
          REQUIRE(two[k].size() == four[k].size());
          std::size_t differ = 0;
          for (std::size_t j = 0; j < two[k].size(); ++j) differ += !bits_equal(two[k][j], four[k][j]);
          CHECK(differ == 0);
        }
      }
    }
  }
}

TEST_CASE("solve_modes gives the same bits with either Rayleigh kernel") {
  // The whole solve (nested iteration, verification counts, Richardson, error estimates,
  // eigenfunctions) with the four-lane kernels and with the two-lane ones, on an n = 3
  // polytrope and a model near marginal stability (n = 1.5, Gamma1 = 1.34), 5 and 8 modes.
  struct Case {
    double n, gamma1;
    int count;
  };
  for (const Case c : {Case{3.0, 5.0 / 3.0, 5}, Case{1.5, 1.34, 8}}) {
    CAPTURE(c.n);
    CAPTURE(c.count);
    GeneratorOptions g;
    g.points = 1201;
    g.gamma1 = c.gamma1;
    const StellarModel model = make_polytrope(c.n, g);
    SolveOptions options;
    options.count = c.count;
    detail::use_wide_kernel(false);
    const ModeSet two = solve_modes(model, options);
    detail::use_wide_kernel(true);
    const ModeSet four = solve_modes(model, options);
    REQUIRE(two.modes.size() == static_cast<std::size_t>(c.count));
    REQUIRE(four.modes.size() == two.modes.size());
    auto same = [](double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; };
    for (std::size_t k = 0; k < two.modes.size(); ++k) {
      const ModeSolution &a = two.modes[k], &b = four.modes[k];
      CHECK(a.order == b.order);
      CHECK(a.nodes == b.nodes);
      CHECK(a.trusted == b.trusted);
      CHECK(a.flag == b.flag);
      CHECK(same(a.omega2, b.omega2));
      CHECK(same(a.omega2_fine, b.omega2_fine));
      CHECK(same(a.omega2_coarse, b.omega2_coarse));
      CHECK(same(a.error_estimate, b.error_estimate));
      CHECK(same(a.residual, b.residual));
      CHECK(same(a.residual_floor, b.residual_floor));
      CHECK(same(a.interpolation_error, b.interpolation_error));
      REQUIRE(a.xi.size() == b.xi.size());
      std::size_t differ = 0;
      for (std::size_t j = 0; j < a.xi.size(); ++j) differ += !same(a.xi[j], b.xi[j]);
      CHECK(differ == 0);
    }
  }
}

TEST_CASE("Galerkin coarsening equals assembling the every-other-node mesh") {
  // A stellar form (n = 3 polytrope, non-uniform mesh), free or rigid inner end, with and
  // without a kept node inside; and an odd number of intervals (one single-interval element).
  GeneratorOptions g;
  g.points = 301;
  const Structure s(make_polytrope(3.0, g));
  const WeakForm f = make_stellar_form(s, SurfaceCondition::regular);
  for (const bool rigid : {false, true})
    for (const std::size_t kept : {std::size_t{0}, std::size_t{117}}) {
      std::vector<bool> keep(f.x.size(), false);
      if (kept) keep[kept] = true;
      const detail::MeshLevel fine{all_nodes(f), rigid, assemble(f, {all_nodes(f), rigid, false})};
      const std::optional<detail::MeshLevel> made = detail::coarsen(fine, f.x, flagged_nodes(keep));
      REQUIRE(made.has_value());
      const detail::MeshLevel& coarse = *made;
      CHECK(coarse.nodes == every_other_node(f, keep));
      const TridiagonalPencil direct = assemble(f, {every_other_node(f, keep), rigid, false});
      REQUIRE(coarse.pencil.size() == direct.size());
      CHECK(coarse.pencil.node == direct.node);
      double kmax = 0, mmax = 0;
      for (std::size_t j = 0; j < direct.size(); ++j) {
        kmax = std::max(kmax, std::abs(direct.k_diag[j]));
        mmax = std::max(mmax, std::abs(direct.m_diag[j]));
      }
      for (std::size_t j = 0; j < direct.size(); ++j) {
        CHECK(std::abs(coarse.pencil.k_diag[j] - direct.k_diag[j]) <= 1e-13 * kmax);
        CHECK(std::abs(coarse.pencil.m_diag[j] - direct.m_diag[j]) <= 1e-13 * mmax);
        if (j + 1 < direct.size()) {
          CHECK(std::abs(coarse.pencil.k_off[j] - direct.k_off[j]) <= 1e-13 * kmax);
          CHECK(std::abs(coarse.pencil.m_off[j] - direct.m_off[j]) <= 1e-13 * mmax);
        }
      }
      // Coarsening again keeps working down to a handful of unknowns (a kept node stays, so
      // the mesh stops shrinking at three nodes), then says no.
      std::optional<detail::MeshLevel> level = coarse;
      std::size_t smallest = coarse.pencil.size();
      for (int depth = 0; level && depth < 20; ++depth) {
        smallest = level->pencil.size();
        level = detail::coarsen(*level, f.x, flagged_nodes(keep));
        if (level && level->pencil.size() == smallest) break;
      }
      CHECK(smallest >= 2);
      CHECK(smallest <= 4);
    }
}

TEST_CASE("nested solves of a large closed-form pencil: the requested eigenvalues, any first index") {
  // solve_pencil on 3,999 unknowns runs the nested iteration; its coarsest mesh is solved by
  // multisection on the inertia count plus Rayleigh quotient iteration (small counts) or by
  // Lanczos (larger ones). Either way the eigenvalues must be the closed-form ones.
  const Dirichlet d(4000);
  for (const auto& request_range : {std::pair{0, 1}, std::pair{0, 5}, std::pair{3, 4},
                                    std::pair{0, 30}, std::pair{10, 20}}) {
    const int first = request_range.first, count = request_range.second; // (INFO captures them)
    PencilRequest request;
    request.first = first;
    request.count = count;
    const PencilSpectrum s = solve_pencil(d.pencil, request);
    INFO("first " << first << ", count " << count);
    CHECK(s.status == SolveStatus::ok);
    CHECK(s.recovered == 0);
    REQUIRE(s.pairs.size() == static_cast<std::size_t>(count));
    for (const PencilEigenpair& e : s.pairs) {
      CHECK(e.index >= first);
      // Round-off: x^T K x sums terms ~ x^2 / h that cancel to lambda x^T M x ~ lambda h x^2,
      // a factor 1 / (lambda h^2) ~ 1.6e6 above eps for the lowest mode (observed: 6e-11).
      CHECK(e.lambda == doctest::Approx(d.exact(e.index)).epsilon(1e-9));
      CHECK(e.residual < 1e-9);
    }
  }
}

TEST_CASE("exactly double eigenvalues: reported with multiplicity 2, never invented") {
  // Two identical decoupled blocks (the Dirichlet pencil twice, no coupling): every eigenvalue
  // is exactly double, so the multisection of the nested solve cannot separate them and hands
  // over to Lanczos; the inertia check then sees two eigenvalues at each lambda. Common
  // practice: a solver must say so rather than return one vector per requested index.
  const Dirichlet d(1000);
  TridiagonalPencil p;
  for (int block = 0; block < 2; ++block) {
    const std::size_t offset = p.k_diag.size();
    for (std::size_t j = 0; j < d.pencil.size(); ++j) {
      p.k_diag.push_back(d.pencil.k_diag[j]);
      p.m_diag.push_back(d.pencil.m_diag[j]);
      p.node.push_back(offset + j);
    }
    for (std::size_t j = 0; j + 1 < d.pencil.size(); ++j) {
      p.k_off.push_back(d.pencil.k_off[j]);
      p.m_off.push_back(d.pencil.m_off[j]);
    }
    if (block == 0) {
      p.k_off.push_back(0.0);
      p.m_off.push_back(0.0);
    }
  }
  for (const int count : {2, 4, 5}) {
    PencilRequest request;
    request.count = count;
    const PencilSpectrum s = solve_pencil(p, request);
    INFO("count " << count);
    CHECK(s.status == SolveStatus::not_converged);
    CHECK(s.pairs.size() < static_cast<std::size_t>(count));
    for (const PencilEigenpair& e : s.pairs) {
      CHECK(e.multiplicity == 2);
      CHECK(e.index % 2 == 0);
      CHECK(e.lambda == doctest::Approx(d.exact(e.index / 2)).epsilon(1e-9));
    }
  }
}
