#include "radmode/eigensolve.hpp"

#include "radmode/discretize.hpp"
#include "radmode/error.hpp"
#include "radmode/structure.hpp"

#include "pair.hpp"
#include "pencil_block.hpp"

#include <Eigen/Dense>
#include <Spectra/SymGEigsShiftSolver.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <sstream>
#include <type_traits>

namespace radmode {

void SolveOptions::validate() const {
  if (window_lo_omega2.has_value() != window_hi_omega2.has_value())
    throw UsageError("window of omega^2: give both the lower and the upper end");
  if (window_lo_omega2) {
    if (!std::isfinite(*window_lo_omega2) || !std::isfinite(*window_hi_omega2))
      throw UsageError("window of omega^2: expected finite ends");
    if (!(*window_lo_omega2 < *window_hi_omega2)) {
      std::ostringstream m;
      m << "window of omega^2: expected lower end < upper end, got " << *window_lo_omega2
        << " .. " << *window_hi_omega2 << " s^-2";
      throw UsageError(m.str());
    }
    return;
  }
  if (count < 1 || count > max_count)
    throw UsageError("number of modes: expected 1.." + std::to_string(max_count) + ", got " +
                     std::to_string(count));
}

namespace {

constexpr double eps = std::numeric_limits<double>::epsilon();

using Vec = Eigen::VectorXd;

void mult(const std::vector<double>& diag, const std::vector<double>& off, const double* x,
          double* y) {
  const std::size_t n = diag.size();
  for (std::size_t j = 0; j < n; ++j) y[j] = diag[j] * x[j];
  for (std::size_t j = 0; j + 1 < n; ++j) {
    y[j] += off[j] * x[j + 1];
    y[j + 1] += off[j] * x[j];
  }
}

/// LDL^T factorization of K - s M (tridiagonal, no pivoting) and its solve.
class Ldlt {
public:
  explicit Ldlt(const TridiagonalPencil& p) : m_p(p), m_d(p.size()), m_l(p.size()) {}

  void factor(double s) {
    const std::size_t n = m_p.size();
    double floor = 0.0;
    for (std::size_t j = 0; j < n; ++j)
      floor = std::max(floor, std::abs(m_p.k_diag[j]) + std::abs(s) * m_p.m_diag[j]);
    floor *= eps * eps;
    for (std::size_t j = 0; j < n; ++j) {
      double d = m_p.k_diag[j] - s * m_p.m_diag[j];
      if (j > 0) d -= m_l[j - 1] * (m_p.k_off[j - 1] - s * m_p.m_off[j - 1]);
      if (std::abs(d) < floor) d = d < 0 ? -floor : floor; // exactly singular: stay finite
      m_d[j] = 1.0 / d; // stored inverted: the solves multiply
      if (j + 1 < n) m_l[j] = (m_p.k_off[j] - s * m_p.m_off[j]) * m_d[j];
    }
  }

  /// y = (K - s M)^{-1} x; x and y may alias.
  void solve(const double* x, double* y) const {
    const std::size_t n = m_p.size();
    if (x == nullptr || y == nullptr || n == 0) return; // (Spectra never passes null)
    y[0] = x[0];
    for (std::size_t j = 1; j < n; ++j) y[j] = x[j] - m_l[j - 1] * y[j - 1];
    for (std::size_t j = 0; j < n; ++j) y[j] *= m_d[j];
    for (std::size_t j = n - 1; j-- > 0;) y[j] -= m_l[j] * y[j + 1];
  }

private:
  const TridiagonalPencil& m_p;
  std::vector<double> m_d, m_l; ///< inverse pivots 1/d_j, multipliers l_j
};

/// One step of inverse iteration x <- (K - s M)^{-1} M x with the factorization f, scaled to
/// max |x| = 1 (mx: workspace). False when the result is zero or not finite.
bool inverse_step(const TridiagonalPencil& p, const Ldlt& f, std::vector<double>& x,
                  std::vector<double>& mx) {
  mult(p.m_diag, p.m_off, x.data(), mx.data());
  f.solve(mx.data(), x.data());
  double big = 0;
  for (const double v : x) big = std::max(big, std::abs(v));
  if (!(big > 0) || !std::isfinite(big)) return false;
  for (double& v : x) v /= big;
  return true;
}

/// Spectra operation: y = (K - sigma M)^{-1} x.
class ShiftInvertOp {
public:
  using Scalar = double;
  explicit ShiftInvertOp(const TridiagonalPencil& p) : m_ldlt(p), m_n(static_cast<Eigen::Index>(p.size())) {}
  Eigen::Index rows() const { return m_n; }
  Eigen::Index cols() const { return m_n; }
  void set_shift(const double& sigma) { m_ldlt.factor(sigma); }
  void perform_op(const double* x_in, double* y_out) const { m_ldlt.solve(x_in, y_out); }

private:
  Ldlt m_ldlt;
  Eigen::Index m_n;
};

/// Spectra operation: y = M x.
class MassOp {
public:
  using Scalar = double;
  explicit MassOp(const TridiagonalPencil& p) : m_p(p) {}
  Eigen::Index rows() const { return static_cast<Eigen::Index>(m_p.size()); }
  Eigen::Index cols() const { return rows(); }
  void perform_op(const double* x_in, double* y_out) const {
    mult(m_p.m_diag, m_p.m_off, x_in, y_out);
  }

private:
  const TridiagonalPencil& m_p;
};

/// Rough magnitude of the spectrum: max |K_jj| / M_jj (about the largest eigenvalue).
double spectrum_scale(const TridiagonalPencil& p) {
  using namespace detail;
  const std::size_t n = p.size(), pairs = n / 2 * 2;
  const double* const kd = p.k_diag.data();
  const double* const md = p.m_diag.data();
  Pair s2 = {0.0, 0.0};
  for (std::size_t j = 0; j < pairs; j += 2) s2 = max2(s2, abs2(load2(kd + j)) / load2(md + j));
  double s = std::max(s2[0], s2[1]);
  if (pairs < n) s = std::max(s, std::abs(kd[n - 1]) / md[n - 1]);
  return std::max(s, std::numeric_limits<double>::min());
}

/// Half-width of the interval around an eigenvalue inside which inertia counts are not
/// trusted to separate it from its neighbours (round-off of the counts and of lambda).
double count_margin(double lambda, double scale) { return 1e-9 * std::abs(lambda) + 64 * eps * scale; }

/// Bottom meshes up to this size are solved by bisection_solve instead of Lanczos.
constexpr std::size_t bisection_max_unknowns = 400;

/// Fewest unknowns of the coarsest mesh of the nested solve for eigenvalue indices below i1.
std::size_t nested_min_unknowns(int i1) { return static_cast<std::size_t>(std::max(4 * i1 + 40, 100)); }

/// Two extra inertia counts taken along with a set's verification (Engine::set_indices): a
/// guard_width below its lowest and above its highest eigenvalue. solve_modes infers from them
/// the counts of its "crowded" check whenever those shifts lie in between, instead of a pass
/// of its own over the pencil (counts are monotone in the shift).
struct GuardCounts {
  double lambda_low = std::numeric_limits<double>::quiet_NaN(); ///< the set's lowest lambda
  double lambda_high = std::numeric_limits<double>::quiet_NaN(); ///< and highest
  double below = 0, above = 0;                 ///< the guard points
  int count_below = -1, count_above = -1;      ///< their counts (-1: not taken)
};

/// The guard distance: a hundredth of |lambda| beyond the count margin (ten error estimates
/// of a mode rarely reach that far, and the gaps between the low radial modes are wider;
/// when either fails, solve_modes counts).
double guard_width(double lambda, double scale) {
  return 1e-2 * std::abs(lambda) + count_margin(lambda, scale);
}

struct Engine {
  const TridiagonalPencil& p;
  double scale;
  int n;
  int counts = 0; ///< inertia evaluations (diagnostics)
  /// Eigenvalue magnitude that normalizes residuals of eigenvalues near zero.
  double lambda_ref = 0;
  /// When set, set_indices also takes the guard counts of its set.
  GuardCounts* guards = nullptr;

  explicit Engine(const TridiagonalPencil& pencil)
      : p(pencil), scale(spectrum_scale(pencil)), n(static_cast<int>(pencil.size())) {}

  int count(double s) {
    ++counts;
    return inertia_below(p, s);
  }

  /// Rayleigh quotient of the constant vector: an upper bound of the lowest eigenvalue.
  double constant_quotient() const {
    double k1 = 0, m1 = 0;
    for (std::size_t j = 0; j < p.size(); ++j) {
      k1 += p.k_diag[j];
      m1 += p.m_diag[j];
    }
    for (std::size_t j = 0; j + 1 < p.size(); ++j) {
      k1 += 2 * p.k_off[j];
      m1 += 2 * p.m_off[j];
    }
    return k1 / m1;
  }

  /// A point below every eigenvalue, within a few bracket widths of the lowest one.
  double below_lowest() {
    const double rq = constant_quotient();
    double delta = std::max(std::abs(rq), 1e-12 * scale);
    double lo = rq - delta;
    for (int it = 0; it < 2000 && count(lo) > 0; ++it) {
      delta *= 4;
      lo = rq - delta;
    }
    double hi = rq + delta;
    for (int it = 0; it < 2000 && count(hi) == 0; ++it) hi += delta *= 4;
    for (int it = 0; it < 6; ++it) {
      const double mid = 0.5 * (lo + hi);
      (count(mid) == 0 ? lo : hi) = mid;
    }
    return lo - (hi - lo);
  }

  /// A point above every eigenvalue.
  double above_highest() {
    double u = 2 * scale;
    for (int it = 0; it < 2000 && count(u) < n; ++it) u *= 4;
    return u;
  }

  /// A point s with count(s) == j (0 <= j <= n), searched by bisection in [a, b] (widened
  /// when needed); nullopt when two eigenvalues are too close to separate.
  std::optional<double> point_with_count(int j, double a, double b) {
    if (!(a < b)) std::swap(a, b);
    for (int it = 0; it < 200 && count(a) > j; ++it) a -= 2 * (b - a) + scale * 1e-12;
    for (int it = 0; it < 200 && count(b) < j; ++it) b += 2 * (b - a) + scale * 1e-12;
    int ca = count(a), cb = count(b);
    if (ca > j || cb < j) return std::nullopt;
    for (int it = 0; it < 200; ++it) {
      if (ca == j) return a;
      if (cb == j) return b;
      if (!bisect(j, a, b, ca, cb)) break;
    }
    return std::nullopt;
  }

  /// Halves [a, b] keeping count(a) <= j < count(b) (ca, cb: the counts); false when the
  /// interval cannot be split further in floating point.
  bool bisect(int j, double& a, double& b, int& ca, int& cb) {
    const double mid = 0.5 * (a + b);
    if (!(mid > a && mid < b)) return false;
    const int cm = count(mid);
    if (cm > j) {
      b = mid;
      cb = cm;
    } else {
      a = mid;
      ca = cm;
    }
    return true;
  }

  /// Fills lambda (Rayleigh quotient), M-normalized x, residual, and (with_index) index and
  /// multiplicity by inertia.
  PencilEigenpair finish(std::vector<double> x, bool with_index = true) {
    std::vector<std::vector<double>> one;
    one.push_back(std::move(x));
    PencilEigenpair e = std::move(finish_all(std::move(one), false).front());
    if (!with_index || !std::isfinite(e.lambda)) return e; // index -1: rejected by the caller
    const double margin = count_margin(e.lambda, scale);
    e.index = count(e.lambda - margin);
    e.multiplicity = count(e.lambda + margin) - e.index;
    return e;
  }

  /// finish() for several vectors, with the inertia counts of all of them done together
  /// (with_index). lambda_ref is raised to the largest |lambda| of the set first, so that the
  /// residuals are final.
  /// `stats` (optional, one per vector): what Rayleigh quotient iteration last measured of
  /// each vector; where complete, the quotient and residual are taken from there instead of
  /// being measured again.
  std::vector<PencilEigenpair> finish_all(std::vector<std::vector<double>> xs, bool with_index = true,
                                          const std::vector<detail::RqiStats>* stats = nullptr) {
    std::vector<PencilEigenpair> out(xs.size());
    std::vector<double> xmx(xs.size());
    auto measured = [&](std::size_t i) {
      if (!stats || i >= stats->size()) return false;
      const detail::RqiStats& st = (*stats)[i];
      return std::isfinite(st.rho) && std::isfinite(st.xmx) && std::isfinite(st.r_norm) &&
             std::isfinite(st.kx_norm) && std::isfinite(st.mx_norm) && std::isfinite(st.a_norm) &&
             st.xmx > 0;
    };
    for (std::size_t i = 0; i < xs.size(); ++i) {
      out[i].x = std::move(xs[i]);
      if (measured(i)) {
        out[i].lambda = (*stats)[i].rho;
        xmx[i] = (*stats)[i].xmx;
      } else {
        xmx[i] = set_quotient(out[i]);
      }
      if (std::isfinite(out[i].lambda)) lambda_ref = std::max(lambda_ref, std::abs(out[i].lambda));
    }
    for (std::size_t i = 0; i < out.size(); ++i) {
      PencilEigenpair& e = out[i];
      if (measured(i)) {
        const detail::RqiStats& st = (*stats)[i];
        set_residual_from(e, st.r_norm, st.kx_norm, st.mx_norm, st.a_norm);
      } else {
        set_residual(e);
      }
      // (Rayleigh quotient iteration leaves x^T M x = 1 to round-off: no pass needed then.)
      if (std::abs(xmx[i] - 1.0) > 8 * eps) {
        const double norm = 1.0 / std::sqrt(xmx[i]);
        for (double& v : e.x) v *= norm;
      }
    }
    if (with_index) set_indices(out);
    return out;
  }

  /// index (inertia just below lambda) and multiplicity (eigenvalues in an interval around
  /// lambda) of each pair with a finite lambda. The pairs are taken in order of lambda; the
  /// interval of a pair reaches from a point below lambda to one above it: lambda -+ its
  /// count_margin at the ends of the set, and between two neighbours whose margins do not
  /// overlap, one point shared by both (their midpoint: so n separated pairs need n + 1 counts,
  /// not 2n). A shared point only widens the intervals: a multiplicity of 1 still means
  /// exactly one eigenvalue around lambda, and the residual test (finalize) places an
  /// eigenvalue within the residual's bound of lambda, far inside the interval. Pairs whose
  /// wide interval holds another count than 1 are counted again at lambda -+ margin.
  void set_indices(std::vector<PencilEigenpair>& out) {
    std::vector<std::size_t> order;
    for (std::size_t i = 0; i < out.size(); ++i)
      if (std::isfinite(out[i].lambda)) order.push_back(i);
    std::sort(order.begin(), order.end(),
              [&](std::size_t a, std::size_t b) { return out[a].lambda < out[b].lambda; });
    std::vector<double> shifts;
    std::vector<std::size_t> below(order.size()), above(order.size()); // into shifts
    for (std::size_t k = 0; k < order.size(); ++k) {
      const double lambda = out[order[k]].lambda, margin = count_margin(lambda, scale);
      const bool shared = k > 0 && shifts.back() < lambda - margin;
      if (shared) {
        shifts.back() = 0.5 * (out[order[k - 1]].lambda + lambda);
      } else {
        shifts.push_back(lambda - margin);
      }
      below[k] = shifts.size() - 1;
      shifts.push_back(lambda + margin);
      above[k] = shifts.size() - 1;
    }
    const std::size_t n_verify = shifts.size();
    if (guards && !order.empty()) { // in the same pass
      guards->lambda_low = out[order.front()].lambda;
      guards->lambda_high = out[order.back()].lambda;
      guards->below = guards->lambda_low - guard_width(guards->lambda_low, scale);
      guards->above = guards->lambda_high + guard_width(guards->lambda_high, scale);
      shifts.push_back(guards->below);
      shifts.push_back(guards->above);
    }
    const std::vector<int> c = detail::inertia_below_many(p, shifts);
    counts += static_cast<int>(shifts.size());
    if (shifts.size() > n_verify) {
      guards->count_below = c[n_verify];
      guards->count_above = c[n_verify + 1];
    }
    // A wide interval that does not hold exactly one eigenvalue (e.g. an eigenvalue between
    // two pairs that no vector found) would reject both neighbours: those pairs are counted
    // again at lambda -+ margin, as if they had no shared point.
    std::vector<std::size_t> again;
    std::vector<double> narrow;
    for (std::size_t k = 0; k < order.size(); ++k) {
      PencilEigenpair& e = out[order[k]];
      e.index = c[below[k]];
      e.multiplicity = c[above[k]] - c[below[k]];
      if (e.multiplicity != 1) {
        const double margin = count_margin(e.lambda, scale);
        again.push_back(order[k]);
        narrow.push_back(e.lambda - margin);
        narrow.push_back(e.lambda + margin);
      }
    }
    if (again.empty()) return;
    const std::vector<int> cn = detail::inertia_below_many(p, narrow);
    counts += static_cast<int>(narrow.size());
    for (std::size_t k = 0; k < again.size(); ++k) {
      PencilEigenpair& e = out[again[k]];
      e.index = cn[2 * k];
      e.multiplicity = cn[2 * k + 1] - cn[2 * k];
    }
  }

  /// (K x)_j and (M x)_j.
  void products(const double* x, std::size_t j, double& kx, double& mx) const {
    const std::size_t m = p.size();
    kx = p.k_diag[j] * x[j];
    mx = p.m_diag[j] * x[j];
    if (j > 0) {
      kx += p.k_off[j - 1] * x[j - 1];
      mx += p.m_off[j - 1] * x[j - 1];
    }
    if (j + 1 < m) {
      kx += p.k_off[j] * x[j + 1];
      mx += p.m_off[j] * x[j + 1];
    }
  }

  /// e.lambda = x^T K x / x^T M x, summed as x . (K x): the row sums of K x cancel locally,
  /// where sum K_ij x_i x_j term by term would lose ~1e-9 relative to cancellation on a
  /// 2,000-point mesh. Returns x^T M x.
  double set_quotient(PencilEigenpair& e) const {
    double xkx = 0, xmx = 0;
    for (std::size_t j = 0; j < p.size(); ++j) {
      double kx, mx;
      products(e.x.data(), j, kx, mx);
      xkx += e.x[j] * kx;
      xmx += e.x[j] * mx;
    }
    e.lambda = xkx / xmx;
    return xmx;
  }

  /// Residual of (e.lambda, e.x) normalized with the current lambda_ref (scale-free in x), and
  /// its round-off level (PencilEigenpair::residual_floor).
  void set_residual(PencilEigenpair& e) const {
    double r2 = 0, k2 = 0, m2 = 0, a2 = 0;
    const std::size_t m = p.size();
    const double* const x = e.x.data();
    const double al = std::abs(e.lambda);
    for (std::size_t j = 0; j < m; ++j) {
      double kx, mx;
      products(x, j, kx, mx);
      double a = std::abs(p.k_diag[j] * x[j]) + al * std::abs(p.m_diag[j] * x[j]);
      if (j > 0) a += std::abs(p.k_off[j - 1] * x[j - 1]) + al * std::abs(p.m_off[j - 1] * x[j - 1]);
      if (j + 1 < m) a += std::abs(p.k_off[j] * x[j + 1]) + al * std::abs(p.m_off[j] * x[j + 1]);
      const double r = kx - e.lambda * mx;
      r2 += r * r;
      k2 += kx * kx;
      m2 += mx * mx;
      a2 += a * a;
    }
    set_residual_from(e, std::sqrt(r2), std::sqrt(k2), std::sqrt(m2), std::sqrt(a2));
  }

  /// residual and residual_floor from the norms ||Kx - lambda Mx||, ||Kx||, ||Mx|| and
  /// || |K||x| + |lambda||M||x| ||.
  void set_residual_from(PencilEigenpair& e, double r, double kx, double mx, double a) const {
    const double denom = kx + std::max(std::abs(e.lambda), lambda_ref) * mx;
    e.residual = denom > 0 ? r / denom : 0.0;
    e.residual_floor = denom > 0 ? eps * a / denom : 0.0;
  }


  /// Inverse iteration at shift mu from a start vector; a few steps suffice when mu is close.
  PencilEigenpair inverse_iteration(double mu, std::vector<double> x) {
    Ldlt f(p);
    f.factor(mu);
    std::vector<double> mx(p.size());
    for (int it = 0; it < 6; ++it)
      if (!inverse_step(p, f, x, mx)) break;
    return finish(std::move(x));
  }

  /// Eigenpair with index j by bisection on the inertia count, then inverse iteration.
  /// [lo, hi] must bracket it (count(lo) <= j < count(hi)).
  std::optional<PencilEigenpair> recover(int j, double lo, double hi) {
    int clo = count(lo), chi = count(hi);
    if (clo > j || chi <= j) return std::nullopt;
    for (int it = 0; it < 300; ++it) {
      if (hi - lo <= 1e-10 * std::max(std::abs(lo), std::abs(hi)) + 16 * eps * scale) break;
      if (!bisect(j, lo, hi, clo, chi)) break;
    }
    // Start vector: smooth, not orthogonal to anything in particular.
    std::vector<double> x(p.size());
    for (std::size_t i = 0; i < x.size(); ++i)
      x[i] = 1.0 + 0.5 * std::sin(0.7 * static_cast<double>(i) + 0.3);
    PencilEigenpair e = inverse_iteration(0.5 * (lo + hi), std::move(x));
    if (e.index != j) return std::nullopt;
    return e;
  }
};

std::vector<std::vector<double>> dense_solve(const TridiagonalPencil& p, int first, int count,
                                             std::vector<double>& lambdas) {
  const auto n = static_cast<Eigen::Index>(p.size());
  Eigen::MatrixXd K = Eigen::MatrixXd::Zero(n, n), M = Eigen::MatrixXd::Zero(n, n);
  for (Eigen::Index j = 0; j < n; ++j) {
    const auto u = static_cast<std::size_t>(j);
    K(j, j) = p.k_diag[u];
    M(j, j) = p.m_diag[u];
    if (j + 1 < n) {
      K(j, j + 1) = K(j + 1, j) = p.k_off[u];
      M(j, j + 1) = M(j + 1, j) = p.m_off[u];
    }
  }
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(K, M);
  std::vector<std::vector<double>> xs;
  if (es.info() != Eigen::Success) return xs;
  for (int j = first; j < first + count && j < n; ++j) {
    lambdas.push_back(es.eigenvalues()(j));
    const Vec v = es.eigenvectors().col(j);
    xs.emplace_back(v.data(), v.data() + n);
  }
  return xs;
}

/// Keeps one pair per target index in [i0, i1) (verified by inertia), recovers the missing
/// ones by bisection + inverse iteration, sorts, and sets status and message.
void finalize(Engine& eng, std::vector<PencilEigenpair> found, int i0, int i1, PencilSpectrum& out) {
  const int nev = i1 - i0;
  // Residuals of eigenvalues near zero are normalized with the largest |lambda| requested.
  double lambda_ref = 0;
  for (const auto& e : found)
    if (std::isfinite(e.lambda)) lambda_ref = std::max(lambda_ref, std::abs(e.lambda));
  if (lambda_ref > eng.lambda_ref) {
    eng.lambda_ref = lambda_ref;
    for (auto& e : found)
      if (std::isfinite(e.lambda) && std::abs(e.lambda) < lambda_ref) eng.set_residual(e);
  }

  // Keep one pair per target index (verified by inertia); recover the missing ones.
  std::vector<std::optional<PencilEigenpair>> slot(static_cast<std::size_t>(nev));
  for (auto& e : found) {
    // Accepted only when inertia sees exactly one eigenvalue at lambda and x is an eigenvector.
    if (e.index < i0 || e.index >= i1 || !std::isfinite(e.lambda) || e.multiplicity != 1 ||
        !(e.residual < std::max(1e-6, 10 * e.residual_floor)))
      continue;
    auto& s = slot[static_cast<std::size_t>(e.index - i0)];
    if (!s || e.residual < s->residual) s = std::move(e);
  }
  double low_bracket = std::numeric_limits<double>::quiet_NaN();
  double high_bracket = std::numeric_limits<double>::quiet_NaN();
  for (int j = i0; j < i1; ++j) {
    auto& s = slot[static_cast<std::size_t>(j - i0)];
    if (s) continue;
    if (std::isnan(low_bracket)) {
      low_bracket = eng.below_lowest();
      high_bracket = eng.above_highest();
    }
    // Tightest bracket from the neighbours already found.
    double lo = low_bracket, hi = high_bracket;
    for (const auto& o : slot)
      if (o && o->index < j) lo = std::max(lo, o->lambda);
      else if (o && o->index > j) hi = std::min(hi, o->lambda);
    s = eng.recover(j, lo, hi);
    if (s) ++out.recovered;
  }
  int missing = 0;
  for (auto& s : slot) {
    if (s) out.pairs.push_back(std::move(*s));
    else ++missing;
  }
  std::sort(out.pairs.begin(), out.pairs.end(),
            [](const PencilEigenpair& a, const PencilEigenpair& b) { return a.lambda < b.lambda; });
  if (missing > 0) {
    if (out.status == SolveStatus::ok) out.status = SolveStatus::not_converged;
    out.message += (out.message.empty() ? "" : "; ") + std::to_string(missing) +
                   " requested eigenvalue(s) could not be established";
  } else if (out.status == SolveStatus::ok && out.recovered > 0) {
    out.message += (out.message.empty() ? "" : "; ") + std::to_string(out.recovered) +
                   " eigenvalue(s) recovered by inertia bisection and inverse iteration";
  }
}

/// Rows x vectors over the steps recorded in `stats` (PencilSpectrum::iteration_work).
std::size_t iteration_work(const std::vector<detail::RqiStats>& stats, std::size_t rows) {
  std::size_t steps = 0;
  for (const auto& st : stats) steps += static_cast<std::size_t>(st.steps);
  return steps * rows;
}

/// Rayleigh quotient iteration from good start vectors (e.g. eigenvectors of a coarser mesh
/// prolonged to this one): two to eight steps, each an O(N) LDL^T factorization and solve (all
/// vectors advanced together, see pencil_block.hpp), until the residual is below
/// `residual_tol` or the quotient stops moving; then the same inertia verification and
/// recovery as solve_pencil. (The eigenvalue error is of the order of the squared residual.)
/// first_shifts: see detail::rayleigh_iterate.
PencilSpectrum refine_from(const TridiagonalPencil& p, int i0, int i1,
                           std::vector<std::vector<double>> starts, double residual_tol,
                           const std::vector<double>& first_shifts,
                           const detail::Prolongation* from = nullptr,
                           GuardCounts* guards = nullptr) {
  Engine eng(p);
  eng.guards = guards;
  PencilSpectrum out;
  const std::vector<detail::RqiStats> stats =
      detail::rayleigh_iterate(p, starts, 2, 8, eng.scale, residual_tol, first_shifts, from);
  out.iteration_work = iteration_work(stats, p.size());
  finalize(eng, eng.finish_all(std::move(starts), true, &stats), i0, i1, out);
  return out;
}

/// Eigenvalue estimates on the next finer mesh from those on two successive coarser ones
/// (`coarse`, and `coarser` with twice its spacing), by the h^2 law of linear elements:
/// lambda ~ coarse - (coarser - coarse)/4. Used only as the shift of the first Rayleigh quotient
/// step, so an estimate is dropped (NaN) unless the coarser value lies above the coarse one (as
/// Courant-Fischer requires of nested meshes) and the correction stays under a quarter of the
/// distance to the neighbouring eigenvalues. Empty when `coarser` is.
std::vector<double> predict_finer(const std::vector<double>& coarse,
                                  const std::vector<double>& coarser) {
  std::vector<double> out;
  if (coarser.size() != coarse.size()) return out;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  for (std::size_t i = 0; i < coarse.size(); ++i) {
    const double step = (coarser[i] - coarse[i]) / 4.0;
    double gap = std::numeric_limits<double>::infinity();
    if (i > 0) gap = std::min(gap, coarse[i] - coarse[i - 1]);
    if (i + 1 < coarse.size()) gap = std::min(gap, coarse[i + 1] - coarse[i]);
    const bool usable = std::isfinite(step) && step >= 0 && step < 0.25 * gap;
    out.push_back(usable ? coarse[i] - step : nan);
  }
  return out;
}

/// Eigenpairs [i0, i1) of a small pencil (the bottom of a nested solve) without Lanczos:
/// multisection on the inertia count separates each target eigenvalue into a bracket of its
/// own, about 1e-3 of its value wide (the midpoints of all open brackets counted together in
/// each round, every count narrowing every bracket it bears on); then Rayleigh quotient
/// iteration, its first step shifted to the bracket's midpoint, from a smooth start vector
/// (the first step is inverse iteration next to the target: its neighbours are damped by at
/// least the ratio of the bracket width to the gap). The same verification and recovery as
/// solve_pencil (finalize). nullopt when the brackets do not form (the caller then uses
/// solve_pencil).
std::optional<PencilSpectrum> bisection_solve(const TridiagonalPencil& p, int i0, int i1) {
  Engine eng(p);
  const int nev = i1 - i0;
  if (nev < 1 || i1 > eng.n) return std::nullopt;
  const auto n_ev = static_cast<std::size_t>(nev);
  // Brackets [blo_k, bhi_k] of the eigenvalue with index i0 + k, with their counts:
  // count(blo_k) <= i0 + k < count(bhi_k). Every count narrows every bracket it bears on.
  const double inf = std::numeric_limits<double>::infinity();
  std::vector<double> blo(n_ev, -inf), bhi(n_ev, inf);
  std::vector<int> clo(n_ev, 0), chi(n_ev, eng.n);
  std::vector<double> shifts;
  auto count_all = [&]() {
    const std::vector<int> c = detail::inertia_below_many(p, shifts);
    eng.counts += static_cast<int>(shifts.size());
    for (std::size_t a = 0; a < shifts.size(); ++a)
      for (std::size_t k = 0; k < n_ev; ++k) {
        const int index = i0 + static_cast<int>(k);
        if (c[a] <= index && shifts[a] > blo[k]) blo[k] = shifts[a], clo[k] = c[a];
        else if (c[a] > index && shifts[a] < bhi[k]) bhi[k] = shifts[a], chi[k] = c[a];
      }
  };
  // Outer bracket: eight points around the Rayleigh quotient of the constant vector (an
  // upper bound of the lowest eigenvalue), rq -+ delta 4^j, counted in one pass (a pass
  // costs about the same for one shift or eight: each shift's recurrence is a chain of
  // dependent divisions), widened until every bracket is finite.
  const double rq = eng.constant_quotient();
  double delta = std::max(std::abs(rq), 1e-12 * eng.scale);
  for (int it = 0; it < 40; ++it) {
    bool finite = true;
    for (std::size_t k = 0; k < n_ev; ++k) finite = finite && std::isfinite(blo[k]) && std::isfinite(bhi[k]);
    if (finite) break;
    shifts.clear();
    for (int j = 0; j < 4; ++j) {
      shifts.push_back(rq - delta * std::ldexp(1.0, 2 * j));
      shifts.push_back(rq + delta * std::ldexp(1.0, 2 * j));
    }
    count_all();
    delta *= 256;
  }
  auto closed = [&](std::size_t k) {
    const double width = bhi[k] - blo[k];
    return chi[k] - clo[k] == 1 &&
           width <= 1e-3 * std::max(std::abs(blo[k]), std::abs(bhi[k])) + 64 * eps * eng.scale;
  };
  // Rounds: up to eight points per pass, spread evenly over the open brackets (brackets
  // shared by several targets counted once), each bracket cut into equal parts.
  for (int round = 0; round < 200; ++round) {
    std::vector<std::size_t> open;
    for (std::size_t k = 0; k < n_ev; ++k) {
      if (!std::isfinite(blo[k]) || !std::isfinite(bhi[k])) return std::nullopt;
      if (closed(k)) continue;
      if (!open.empty() && blo[open.back()] == blo[k] && bhi[open.back()] == bhi[k]) continue;
      open.push_back(k);
    }
    if (open.empty()) break;
    shifts.clear();
    constexpr std::size_t per_pass = 8; // the widest block of inertia_below_many
    const std::size_t per = std::max<std::size_t>(1, per_pass / open.size());
    for (const std::size_t k : open) {
      const double step = (bhi[k] - blo[k]) / static_cast<double>(per + 1);
      for (std::size_t q = 1; q <= per; ++q) {
        const double point = blo[k] + step * static_cast<double>(q);
        if (!(point > blo[k] && point < bhi[k])) return std::nullopt; // cannot split further
        shifts.push_back(point);
      }
    }
    count_all();
  }
  for (std::size_t k = 0; k < n_ev; ++k)
    if (!closed(k)) return std::nullopt;
  // The same start vector for every target (the shift picks the eigenvector out).
  std::vector<double> start(p.size());
  for (std::size_t i = 0; i < p.size(); ++i)
    start[i] = 1.0 + 0.5 * std::sin(0.7 * static_cast<double>(i) + 0.3);
  std::vector<std::vector<double>> xs(n_ev, start);
  std::vector<double> first_shifts(n_ev);
  for (std::size_t k = 0; k < n_ev; ++k) first_shifts[k] = 0.5 * (blo[k] + bhi[k]);
  PencilSpectrum out;
  const std::vector<detail::RqiStats> stats =
      detail::rayleigh_iterate(p, xs, 1, 8, eng.scale, 1e-10, first_shifts);
  out.iteration_work = iteration_work(stats, p.size());
  finalize(eng, eng.finish_all(std::move(xs), true, &stats), i0, i1, out);
  out.shift = first_shifts.front();
  return out;
}

/// Nested iteration over a family of meshes, each every other node of the one above (pencils
/// by Galerkin restriction, detail::coarsen): bisection_solve on the coarsest (solve_pencil,
/// i.e. Spectra shift-invert Lanczos, above bisection_max_unknowns or if that fails), then
/// Rayleigh quotient iteration on each finer mesh from the prolonged eigenvectors of the
/// one below, up to `coarse` (every other node of the fine mesh) and the fine pencil `pf`
/// itself. Levels below `coarse` only supply start vectors; `coarse` and `pf` are verified by
/// inertia (refine_from). x: base-mesh coordinates; keep: base nodes every level keeps.
/// Returns the spectra of [i0, i1) on pf and on coarse, or nullopt when a stage failed (the
/// caller then solves pf directly).
std::optional<std::pair<PencilSpectrum, PencilSpectrum>>
nested_solve(const TridiagonalPencil& pf, const detail::MeshLevel& coarse,
             const std::vector<double>& x, const std::vector<std::size_t>& keep, int i0, int i1,
             GuardCounts* guards = nullptr) {
  const TridiagonalPencil* pc = &coarse.pencil;
  PencilRequest by_index;
  by_index.first = i0;
  by_index.count = i1 - i0;
  // Lower levels while they keep at least nested_min_unknowns (enough nodes per wavelength
  // for good start vectors).
  const std::size_t min_unknowns = nested_min_unknowns(i1);
  std::vector<detail::MeshLevel> lower;
  while (true) {
    const detail::MeshLevel& top = lower.empty() ? coarse : lower.back();
    if (top.pencil.size() < 2 * min_unknowns) break;
    std::optional<detail::MeshLevel> next = detail::coarsen(top, x, keep);
    // (Kept discontinuities can stop a mesh from shrinking: then it is the coarsest.)
    if (!next || 4 * next->pencil.size() > 3 * top.pencil.size()) break;
    lower.push_back(std::move(*next));
  }
  const TridiagonalPencil& bottom = lower.empty() ? *pc : lower.back().pencil;
  std::optional<PencilSpectrum> by_bisection;
  if (bottom.size() <= bisection_max_unknowns) by_bisection = bisection_solve(bottom, i0, i1);
  PencilSpectrum sb = by_bisection && by_bisection->status == SolveStatus::ok
                          ? std::move(*by_bisection)
                          : solve_pencil(bottom, by_index);
  if (sb.status != SolveStatus::ok || static_cast<int>(sb.pairs.size()) != i1 - i0) return std::nullopt;
  std::vector<std::vector<double>> xs;
  xs.reserve(sb.pairs.size());
  // Eigenvalues on the last two meshes climbed: the first shift on the next one is
  // extrapolated from them (predict_finer).
  std::vector<double> lambda_coarser, lambda_coarse;
  for (auto& c : sb.pairs) {
    // (When the bottom is `coarse` itself, its pairs are kept whole: they are its spectrum.)
    if (!lower.empty()) xs.push_back(std::move(c.x));
    lambda_coarse.push_back(c.lambda);
  }
  auto climbed = [&](std::vector<double> lambdas) {
    lambda_coarser = std::move(lambda_coarse);
    lambda_coarse = std::move(lambdas);
  };
  // Up through the lower levels: one Rayleigh quotient step each (start vectors only), each
  // level's vectors interpolated from the one below as the step loads them.
  const TridiagonalPencil* from = &bottom;
  std::size_t lower_work = sb.iteration_work;
  for (std::size_t l = lower.size(); l-- > 1;) {
    const TridiagonalPencil& to = lower[l - 1].pencil;
    const detail::Prolongation up{x, *from};
    std::vector<double> lambdas;
    const std::vector<detail::RqiStats> stats = detail::rayleigh_iterate(
        to, xs, 1, 1, spectrum_scale(to), 0, predict_finer(lambda_coarse, lambda_coarser), &up);
    for (const auto& st : stats) lambdas.push_back(st.rho);
    lower_work += iteration_work(stats, to.size());
    climbed(std::move(lambdas));
    from = &to;
  }
  PencilSpectrum sc;
  if (lower.empty()) {
    sc = std::move(sb);
  } else {
    // Its eigenvectors only start the fine mesh's iteration: residual 1e-7 suffices (the
    // eigenvalues are then exact to round-off, being quadratic in the residual).
    const detail::Prolongation up{x, *from};
    sc = refine_from(*pc, i0, i1, std::move(xs), 1e-7, predict_finer(lambda_coarse, lambda_coarser),
                     &up);
    sc.iterations = sb.iterations;
    sc.iteration_work += lower_work;
  }
  if (sc.status != SolveStatus::ok || static_cast<int>(sc.pairs.size()) != i1 - i0) return std::nullopt;
  std::vector<std::vector<double>> starts;
  starts.reserve(sc.pairs.size());
  std::vector<double> lambdas;
  for (const auto& c : sc.pairs) {
    starts.push_back(c.x); // interpolated onto pf as the first step loads it
    lambdas.push_back(c.lambda);
  }
  if (!lower.empty()) climbed(std::move(lambdas));
  else lambda_coarse = std::move(lambdas);
  const detail::Prolongation up{x, *pc};
  PencilSpectrum sf = refine_from(pf, i0, i1, std::move(starts), 1e-10,
                                  predict_finer(lambda_coarse, lambda_coarser), &up, guards);
  sf.iterations = sb.iterations;
  sf.iteration_work += sc.iteration_work;
  sf.shift = sb.shift;
  return std::make_pair(std::move(sf), std::move(sc));
}

} // namespace

PencilSpectrum solve_pencil(const TridiagonalPencil& p, const PencilRequest& req) {
  const std::size_t n_unknowns = p.size();
  if (n_unknowns < 2 || p.k_off.size() + 1 != n_unknowns || p.m_diag.size() != n_unknowns ||
      p.m_off.size() + 1 != n_unknowns)
    throw UsageError("eigen-solve: pencil with inconsistent sizes or fewer than 2 unknowns");
  for (std::size_t j = 0; j < n_unknowns; ++j)
    if (!(p.m_diag[j] > 0) || !std::isfinite(p.k_diag[j]))
      throw UsageError("eigen-solve: M must be positive definite and K finite (row " +
                       std::to_string(j) + ")");
  const bool window = req.window_lo.has_value() && req.window_hi.has_value();
  if (!window && (req.first < 0 || req.count < 1))
    throw UsageError("eigen-solve: expected first >= 0 and count >= 1");
  if (window && !(*req.window_lo < *req.window_hi))
    throw UsageError("eigen-solve: expected window_lo < window_hi");

  Engine eng(p);
  const int n = eng.n;
  PencilSpectrum out;

  // 1. Target indices [i0, i1) and the shift.
  int i0 = 0, i1 = 0;
  double sigma = 0;
  if (window) {
    i0 = eng.count(*req.window_lo);
    i1 = eng.count(*req.window_hi);
    sigma = 0.5 * (*req.window_lo + *req.window_hi); // the targets are exactly the nearest
  } else {
    i0 = req.first;
    i1 = req.first + req.count;
    if (i1 > n) {
      out.status = SolveStatus::fewer_modes;
      out.message = "requested eigenvalues up to index " + std::to_string(i1 - 1) +
                    " but the mesh has only " + std::to_string(n) + " unknowns";
      i1 = n;
    }
    if (i0 >= i1) return out;
    // Large pencils: nested iteration over every-other-node meshes of the pencil's own nodes
    // (coordinates: the node indices; any interpolation gives a valid Galerkin subspace).
    bool ordered = p.node.size() == p.size();
    for (std::size_t j = 1; ordered && j < p.node.size(); ++j) ordered = p.node[j] > p.node[j - 1];
    if (ordered && p.size() >= 4 * nested_min_unknowns(i1)) {
      std::vector<double> x(p.node.back() + 1);
      for (std::size_t b = 0; b < x.size(); ++b) x[b] = static_cast<double>(b);
      const std::optional<detail::MeshLevel> coarse = detail::coarsen(p.node, false, p, x, {});
      if (coarse && static_cast<int>(coarse->pencil.size()) >= 2 * i1 + 20)
        if (auto both = nested_solve(p, *coarse, x, {}, i0, i1)) {
          PencilSpectrum& sf = both->first;
          if (out.status != SolveStatus::ok) { // fewer_modes, said above
            sf.status = out.status;
            sf.message = out.message + (sf.message.empty() ? "" : "; " + sf.message);
          }
          return std::move(sf);
        }
    }
    const double low = eng.below_lowest();
    if (i0 == 0) {
      sigma = low;
    } else {
      const double high = eng.above_highest();
      const auto a = eng.point_with_count(i0, low, high);
      const auto b = eng.point_with_count(i1, a.value_or(low), high);
      sigma = (a && b) ? 0.5 * (*a + *b) : low;
    }
  }
  out.shift = sigma;
  const int nev = i1 - i0;
  if (nev <= 0) return out;

  // 2. Solve: Spectra shift-invert Lanczos, or dense for tiny pencils (N <= 40, or a Lanczos
  //    basis as large as the pencil).
  std::vector<PencilEigenpair> found;
  const int ncv = std::min(n, std::max(2 * nev + 1, nev + 10));
  if (n <= 40 || ncv >= n) {
    std::vector<double> lambdas;
    found = eng.finish_all(dense_solve(p, i0, nev, lambdas));
  } else {
    try {
      ShiftInvertOp op(p);
      MassOp bop(p);
      Spectra::SymGEigsShiftSolver<ShiftInvertOp, MassOp, Spectra::GEigsMode::ShiftInvert> eigs(
          op, bop, nev, ncv, sigma);
      eigs.init();
      // A loose tolerance: every Ritz vector is polished below by Rayleigh quotient
      // iteration, which also makes the result independent of how far the Lanczos
      // recurrence can be trusted in floating point (for N ~ 1e5 the shifted operator's
      // condition number keeps Spectra from certifying much beyond 1e-9).
      const auto nconv = eigs.compute(Spectra::SortRule::LargestMagn, 1000, 1e-8,
                                      Spectra::SortRule::SmallestAlge);
      out.iterations = static_cast<int>(eigs.num_iterations());
      if (nconv > 0) {
        const Eigen::MatrixXd vecs = eigs.eigenvectors();
        std::vector<std::vector<double>> xs;
        for (Eigen::Index c = 0; c < vecs.cols(); ++c) {
          const Vec v = vecs.col(c);
          xs.emplace_back(v.data(), v.data() + v.size());
        }
        // Polish: Rayleigh quotient iteration until the residual is below 1e-10 (one step
        // for most vectors; Ritz vectors far from the shift may need two or three).
        const std::vector<detail::RqiStats> stats = detail::rayleigh_iterate(p, xs, 1, 3, eng.scale, 1e-10);
        out.iteration_work += iteration_work(stats, p.size());
        found = eng.finish_all(std::move(xs), true, &stats);
      }
      if (eigs.info() != Spectra::CompInfo::Successful) {
        out.message = "Spectra did not converge for every requested eigenvalue (" +
                      std::to_string(nconv) + " of " + std::to_string(nev) + ")";
      }
    } catch (const std::exception& e) {
      out.message = std::string("Spectra failed: ") + e.what();
    }
  }

  finalize(eng, std::move(found), i0, i1, out);
  return out;
}

namespace {

/// max |x_i| and min |x_i| (0 for an empty x; NaN entries are skipped, as std::max and
/// std::min skip them). Four running extrema: one alone is a chain of dependent operations,
/// several times slower.
struct AbsRange {
  double max = 0, min = 0;
};
AbsRange abs_range(const std::vector<double>& x) {
  using namespace detail;
  const std::size_t n = x.size(), quads = n / 4 * 4;
  if (n == 0) return {};
  const double* const v = x.data();
  const double first = std::abs(v[0]);
  Pair hi[2] = {{0.0, 0.0}, {0.0, 0.0}}, lo[2] = {{first, first}, {first, first}};
  for (std::size_t i = 0; i < quads; i += 4)
    for (std::size_t k = 0; k < 2; ++k) {
      const Pair a = abs2(load2(v + i + 2 * k));
      hi[k] = max2(hi[k], a);
      lo[k] = min2(lo[k], a);
    }
  const Pair h = max2(hi[0], hi[1]), l = min2(lo[0], lo[1]);
  AbsRange out{std::max(h[0], h[1]), std::min(l[0], l[1])};
  for (std::size_t i = quads; i < n; ++i) {
    out.max = std::max(out.max, std::abs(v[i]));
    out.min = std::min(out.min, std::abs(v[i]));
  }
  return out;
}

/// Sign changes of xi, ignoring entries below 1e-9 max|xi| (the exact zero at a rigid inner
/// boundary and round-off next to it). `range`: abs_range(xi).
int count_nodes(const std::vector<double>& xi, const AbsRange& range) {
  const double threshold = 1e-9 * range.max;
  int nodes = 0;
  if (range.min > threshold) {
    // No entry to skip (the common case): the sign changes of neighbours, without branches,
    // two neighbour pairs at a time (a lane's mask is -1 where the signs differ).
    using namespace detail;
    const double* const v = xi.data();
    const std::size_t pairs = xi.size() < 2 ? 0 : (xi.size() - 1) / 2 * 2;
    PairMask changes = {0, 0};
    const Pair zero = {0.0, 0.0};
    for (std::size_t i = 0; i < pairs; i += 2)
      changes += (load2(v + i) < zero) ^ (load2(v + i + 1) < zero);
    nodes = -static_cast<int>(changes[0] + changes[1]);
    for (std::size_t i = pairs; i + 1 < xi.size(); ++i) nodes += (v[i] < 0) != (v[i + 1] < 0);
    return nodes;
  }
  int sign = 0;
  for (const double v : xi) {
    if (std::abs(v) <= threshold) continue;
    const int sv = v > 0 ? 1 : -1;
    if (sign != 0 && sv != sign) ++nodes;
    sign = sv;
  }
  return nodes;
}

/// The vector with value x[j] / by at node[j] (increasing) and 0 at the other of `nodes` nodes.
std::vector<double> scaled_at_nodes(const std::vector<double>& x,
                                    const std::vector<std::size_t>& node, std::size_t nodes,
                                    double by) {
  std::vector<double> out(nodes, 0.0);
  if (x.empty()) return out;
  if (node.back() - node.front() + 1 == x.size()) {
    // Consecutive nodes (the usual case): a plain loop, two divisions per instruction.
    const std::size_t pairs = x.size() / 2 * 2;
    const double* const from = x.data();
    double* const to = out.data() + node.front();
    for (std::size_t j = 0; j < pairs; j += 2) detail::store2(to + j, detail::load2(from + j) / by);
    for (std::size_t j = pairs; j < x.size(); ++j) to[j] = from[j] / by;
  } else {
    for (std::size_t j = 0; j < x.size(); ++j) out[node[j]] = x[j] / by;
  }
  return out;
}

/// The round-off scale of x^T A x for tridiagonal A (diagonal ad, off-diagonal ao), per unit
/// x^T B x = den: sqrt(sum_i (|x_i| sum_j |A_ij x_j|)^2) / den (the standard deviation of the
/// sum of the products A_ij x_i x_j if each carries an independent relative rounding error of
/// order one). Four running sums (independent additions).
double roundoff_scale(const std::vector<double>& ad, const std::vector<double>& ao,
                      const std::vector<double>& x, double den) {
  using namespace detail;
  const std::size_t n = x.size();
  if (n == 0) return 0.0;
  const double* const a = ad.data();
  const double* const o = ao.data();
  const double* const v = x.data();
  auto term = [&](std::size_t j) {
    double abs_ax = std::abs(a[j] * v[j]);
    if (j > 0) abs_ax += std::abs(o[j - 1] * v[j - 1]);
    if (j + 1 < n) abs_ax += std::abs(o[j] * v[j + 1]);
    const double t = v[j] * abs_ax;
    return t * t;
  };
  double s = term(0);
  std::size_t j = 1;
  // Inner rows (both neighbours exist), two pairs of rows at a time in independent sums.
  Pair sums[2] = {{0.0, 0.0}, {0.0, 0.0}};
  for (; j + 4 < n; j += 4)
    for (std::size_t k = 0; k < 2; ++k) {
      const std::size_t i = j + 2 * k;
      const Pair t = load2(v + i) * (abs2(load2(a + i) * load2(v + i)) +
                                     abs2(load2(o + i - 1) * load2(v + i - 1)) +
                                     abs2(load2(o + i) * load2(v + i + 1)));
      sums[k] += t * t;
    }
  for (; j < n; ++j) s += term(j);
  const Pair total = sums[0] + sums[1];
  return std::sqrt(s + (total[0] + total[1])) / den;
}

void add_flag(ModeSolution& m, const std::string& text) {
  m.trusted = false;
  m.flag += (m.flag.empty() ? "" : "; ") + text;
}

} // namespace

namespace {

/// First-order change of each eigenvalue (pencil units) when the model between its table rows
/// is interpolated from every other row instead of all rows:
///     d lambda = x^T (dK - lambda dM) x / x^T M x,
/// where dK, dM come from the change of the form's coefficients a, b, c, d (discretize.hpp),
/// integrated over each element of the model mesh with Simpson's rule (the eigenvector is
/// linear there). Both interpolations reproduce the kept rows exactly, so the change vanishes
/// at the kept nodes; at a dropped row it is the coarser interpolant's error at that row.
/// `kept`: base nodes of the half structure (every_other_node), `half`: its curves.
///
/// Simpson's rule on element i (length h, end values u_i, u_{i+1}, slope s = du/h, midpoint
/// value u_m), with F(D, u) = D.a s^2 + 2 D.b u s + (D.c - lambda D.d) u^2 and D the change
/// at the ends (R_i, R_{i+1}) and at the midpoint (M_i):
///     h/6 [F(R_i, u_i) + 4 F(M_i, u_m) + F(R_{i+1}, u_{i+1})]
///   = (R_i.a + 4 M_i.a + R_{i+1}.a)/(6h) du^2 + (4 M_i.b/3) u_m du + 4h/6 (M_i.c - lambda M_i.d) u_m^2
///     + the end terms, gathered per node j (from elements j - 1 and j):
///       (R_j.b/3) u_j (u_{j+1} - u_{j-1}) + (h_{j-1} + h_j)/6 (R_j.c - lambda R_j.d) u_j^2.
/// Computed in blocks of elements: first the change of the coefficients (the half structure
/// evaluated at all points of the block together), then these weights, then one pass per mode
/// without divisions.
std::vector<double> interpolation_change(const Structure& s, const Structure::RowSubset& half,
                                         const std::vector<std::size_t>& kept,
                                         const std::vector<double>& x,
                                         const TridiagonalPencil& pf,
                                         const std::vector<PencilEigenpair>& pairs) {
  const StellarUnits units = stellar_units(s);
  const std::size_t offset = pf.node.front(); // 1 with a rigid inner node
  const std::vector<double>& r = s.node_r();
  const std::size_t n_modes = pairs.size();
  std::vector<double> change(n_modes, 0.0);
  if (kept.size() < 2 || n_modes == 0) return change;
  // The eigenvectors by base node (0 at a removed rigid inner node).
  const std::size_t n_nodes = x.size();
  std::vector<double> u(n_modes * n_nodes, 0.0);
  for (std::size_t e = 0; e < n_modes; ++e)
    std::copy(pairs[e].x.begin(), pairs[e].x.end(),
              u.begin() + static_cast<std::ptrdiff_t>(e * n_nodes + offset));
  // The change of P or rho at a point from the two interpolations' values there: where both
  // interpolate in log space, v_full expm1(ln v_half - ln v_full) (no cancellation, and no
  // exponential for the small differences: expm1 by its series below 1e-3, error < 2e-18
  // relative); else the difference of the values.
  // (The series on T = double or Pair: the same operations lane by lane.)
  auto expm1_series = [](auto d) {
    constexpr double c2 = 1.0 / 2, c3 = 1.0 / 6, c4 = 1.0 / 24, c5 = 1.0 / 120;
    return d + d * d * (c2 + d * (c3 + d * (c4 + d * c5)));
  };
  auto change_of = [&](double half_v, bool half_log, double full_v, double full_log_v,
                       bool full_log) {
    if (half_log && full_log) {
      const double d = half_v - full_log_v;
      return full_v * (std::abs(d) < 1e-3 ? expm1_series(d) : std::expm1(d));
    }
    return (half_log ? std::exp(half_v) : half_v) - full_v;
  };

  // Blocks of half-structure intervals [k0, k1): each spans one or two model elements, so at
  // most three evaluation points (two midpoints, one dropped row) per interval.
  constexpr std::size_t block = 64, max_points = 3 * block, max_elements = 2 * block;
  std::array<std::size_t, max_points> at_interval{}, full_interval{};
  std::array<double, max_points> at_t{}, full_t{};
  std::array<StructureValues, max_points> half_v{}, full_v{}, full_log{};
  std::array<unsigned char, max_points> half_logs{}, full_logs{};
  std::array<double, max_points> at_x{}, ca{}, cb{}, cc{}, cd{}; // point x, coefficient changes
  // Weights per element (A du^2, Bm u_m du, Cm - lambda Dm u_m^2) and per node of the block
  // (Bn, Cn, Dn; node j at index j - first element).
  std::array<double, max_elements> A{}, Bm{}, Cm{}, Dm{}, six_h{};
  std::array<double, max_elements + 1> Bn{}, Cn{}, Dn{};
  for (std::size_t k0 = 0; k0 + 1 < kept.size(); k0 += block) {
    const std::size_t k1 = std::min(kept.size() - 1, k0 + block);
    const std::size_t i0 = kept[k0], i1 = kept[k1]; // elements [i0, i1)
    if (i1 - i0 > 2 * (k1 - k0)) // every_other_node never makes such elements
      throw Error(ErrorKind::numerical, "interpolation error estimate: an element of the "
                                        "every-other-row mesh spans more than two model elements");
    // The points: each element's midpoint, and each dropped row (a node strictly inside a half
    // interval), in the half structure's and the whole structure's intervals.
    std::size_t np = 0;
    for (std::size_t k = k0; k < k1; ++k) {
      const double r0 = r[kept[k]], inv_span = 1.0 / (r[kept[k + 1]] - r0);
      for (std::size_t i = kept[k]; i < kept[k + 1]; ++i) {
        at_interval[np] = k;
        at_t[np] = (0.5 * (r[i] + r[i + 1]) - r0) * inv_span;
        at_x[np] = 0.5 * (x[i] + x[i + 1]);
        full_interval[np] = i;
        full_t[np++] = 0.5;
        if (i + 1 != kept[k + 1]) {
          at_interval[np] = k;
          at_t[np] = (r[i + 1] - r0) * inv_span;
          at_x[np] = x[i + 1];
          full_interval[np] = i + 1;
          full_t[np++] = 0.0;
        }
      }
    }
    half.log_values_at(at_interval.data(), at_t.data(), np, half_v.data(), half_logs.data());
    s.log_values_at(full_interval.data(), full_t.data(), np, full_log.data(), full_logs.data(),
                    full_v.data());
    // Changes of the coefficients at every point; two points at a time (Pair) where both
    // interpolate P and rho in log space on both sides with log differences below 1e-3 (the
    // common case: the series), else one at a time.
    auto coefficient_change = [&](std::size_t point) {
      const StructureValues& h = half_v[point];
      const StructureValues& f = full_v[point];
      const StructureValues& fl = full_log[point];
      StructureValues d;
      d.m = h.m - f.m;
      d.gamma1 = h.gamma1 - f.gamma1;
      d.P = change_of(h.P, half_logs[point] & Structure::log_P, f.P, fl.P,
                      full_logs[point] & Structure::log_P);
      d.rho = change_of(h.rho, half_logs[point] & Structure::log_rho, f.rho, fl.rho,
                        full_logs[point] & Structure::log_rho);
      const FormCoefficients c = stellar_coefficients_change(f, d, at_x[point], units);
      ca[point] = c.a, cb[point] = c.b, cc[point] = c.c, cd[point] = c.d;
    };
    constexpr unsigned both_logs = Structure::log_P | Structure::log_rho;
    auto series_point = [&](std::size_t q) {
      return (half_logs[q] & both_logs) == both_logs && (full_logs[q] & both_logs) == both_logs &&
             std::abs(half_v[q].P - full_log[q].P) < 1e-3 &&
             std::abs(half_v[q].rho - full_log[q].rho) < 1e-3;
    };
    std::size_t q = 0;
    for (; q + 2 <= np; q += 2) {
      if (!series_point(q) || !series_point(q + 1)) {
        coefficient_change(q);
        coefficient_change(q + 1);
        continue;
      }
      using detail::Pair;
      auto pair = [&](const std::array<StructureValues, max_points>& v,
                      double StructureValues::*field) {
        return Pair{v[q].*field, v[q + 1].*field};
      };
      const Pair fm = pair(full_v, &StructureValues::m), fP = pair(full_v, &StructureValues::P),
                 frho = pair(full_v, &StructureValues::rho),
                 fg = pair(full_v, &StructureValues::gamma1);
      const Pair dP = fP * expm1_series(pair(half_v, &StructureValues::P) -
                                        pair(full_log, &StructureValues::P));
      const Pair drho = frho * expm1_series(pair(half_v, &StructureValues::rho) -
                                            pair(full_log, &StructureValues::rho));
      const auto c = detail::stellar_coefficients_change_of(
          fm, fP, frho, fg, pair(half_v, &StructureValues::m) - fm, dP, drho,
          pair(half_v, &StructureValues::gamma1) - fg, detail::load2(&at_x[q]), units);
      detail::store2(&ca[q], c.a);
      detail::store2(&cb[q], c.b);
      detail::store2(&cc[q], c.c);
      detail::store2(&cd[q], c.d);
    }
    if (q < np) coefficient_change(q);
    // -> weights.
    constexpr double third = 1.0 / 3.0, sixth = 1.0 / 6.0;
    std::size_t p = 0;
    for (std::size_t i = i0; i <= i1; ++i) Bn[i - i0] = Cn[i - i0] = Dn[i - i0] = 0.0;
    for (std::size_t k = k0; k < k1; ++k) {
      double left_a = 0.0; // change of a at the element's left node (0 at a kept node)
      for (std::size_t i = kept[k]; i < kept[k + 1]; ++i) {
        const double h = x[i + 1] - x[i];
        const std::size_t pm = p++; // the midpoint's coefficient changes
        double right_a = 0.0; // change of a at node i + 1 (0 at a kept node)
        if (i + 1 != kept[k + 1]) {
          const std::size_t pr = p++; // the dropped row's
          const std::size_t jn = i + 1 - i0;
          right_a = ca[pr];
          Bn[jn] = third * cb[pr];
          // Both elements at this node lie in this block (kept nodes bound the blocks).
          const double hh6 = sixth * (x[i + 2] - x[i]);
          Cn[jn] = hh6 * cc[pr];
          Dn[jn] = hh6 * cd[pr];
        }
        const std::size_t ie = i - i0;
        A[ie] = left_a + 4.0 * ca[pm] + right_a; // divided by 6h below
        six_h[ie] = 6.0 * h;
        Bm[ie] = 4.0 * third * cb[pm];
        Cm[ie] = 4.0 * sixth * h * cc[pm];
        Dm[ie] = 4.0 * sixth * h * cd[pm];
        left_a = right_a;
      }
    }
    // The divisions of A in a loop of their own (two per instruction).
    for (std::size_t ie = 0; ie < i1 - i0; ++ie) A[ie] /= six_h[ie];
    // One pass per group of up to four modes over the block (the weights loaded once for
    // the group; each mode's arithmetic and order of additions as in a pass of its own),
    // elements and inner nodes (a block's end nodes are kept: no change there) together; two
    // running sums per mode, so that the additions of neighbouring elements do not wait for
    // each other: the even and the odd elements in the two lanes of a Pair (the same
    // operations as on doubles, lane by lane).
    const std::size_t ne = i1 - i0;
    using detail::Pair;
    using detail::load2;
    auto pass = [&](auto group, std::size_t e0) {
      constexpr std::size_t G = decltype(group)::value;
      std::array<double, G> lambda;
      std::array<const double*, G> v; // v[g][j] = u of mode e0 + g at node i0 + j
      for (std::size_t g = 0; g < G; ++g) {
        lambda[g] = pairs[e0 + g].lambda;
        v[g] = u.data() + (e0 + g) * n_nodes + i0;
      }
      // Element ie (and ie + 1 in the second lane) and node jn (and jn + 1) of mode e0 + g,
      // on T = double or Pair, with load(p) = *p or the Pair {p[0], p[1]}.
      auto element = [&](std::size_t g, std::size_t ie, auto load) {
        const auto v0 = load(v[g] + ie), v1 = load(v[g] + ie + 1);
        const auto du = v1 - v0, um = 0.5 * (v0 + v1);
        return load(&A[ie]) * du * du + load(&Bm[ie]) * um * du +
               (load(&Cm[ie]) - lambda[g] * load(&Dm[ie])) * um * um;
      };
      auto node = [&](std::size_t g, std::size_t jn, auto load) {
        const auto vj = load(v[g] + jn);
        return load(&Bn[jn]) * vj * (load(v[g] + jn + 1) - load(v[g] + jn - 1)) +
               (load(&Cn[jn]) - lambda[g] * load(&Dn[jn])) * vj * vj;
      };
      const auto one = [](const double* at) { return *at; };
      const auto two = [](const double* at) { return load2(at); };
      std::array<Pair, G> sums; // lane 0: even elements, lane 1: odd
      for (std::size_t g = 0; g < G; ++g) sums[g] = Pair{element(g, 0, one), 0.0};
      std::size_t k = 1;
      for (; k + 2 <= ne; k += 2)
        for (std::size_t g = 0; g < G; ++g) sums[g] += element(g, k, two) + node(g, k, two);
      for (std::size_t g = 0; g < G; ++g) {
        double even = sums[g][0];
        if (k < ne) even += element(g, k, one) + node(g, k, one);
        change[e0 + g] += even + sums[g][1];
      }
    };
    for (std::size_t e0 = 0; e0 < n_modes;) {
      const std::size_t rest = n_modes - e0;
      if (rest >= 4) pass(std::integral_constant<std::size_t, 4>{}, e0), e0 += 4;
      else if (rest == 3) pass(std::integral_constant<std::size_t, 3>{}, e0), e0 += 3;
      else if (rest == 2) pass(std::integral_constant<std::size_t, 2>{}, e0), e0 += 2;
      else pass(std::integral_constant<std::size_t, 1>{}, e0), e0 += 1;
    }
  }
  return change;
}

} // namespace

ModeSet solve_modes(const StellarModel& model, const SolveOptions& options) {
  options.validate();
  const Structure s(model, options.inner);
  const double unit = omega2_unit(s);
  const bool rigid = options.inner == InnerCondition::rigid;
  // The model mesh's pencil, assembled while the form is sampled (form.x: the base mesh).
  const ModelPencil form = assemble_stellar_form(s, options.surface, rigid);
  const MeshSelection fine{all_nodes(form.x.size() - 1), rigid, false};
  const TridiagonalPencil& pf = form.pencil;

  // Target indices [i0, i1): eigenvalue index = inertia count.
  Engine eng(pf);
  const int n_fine = eng.n;
  int i0 = 0, i1 = 0;
  PencilRequest request;
  if (options.window_lo_omega2) {
    request.window_lo = *options.window_lo_omega2 / unit;
    request.window_hi = *options.window_hi_omega2 / unit;
    i0 = eng.count(*request.window_lo);
    i1 = eng.count(*request.window_hi);
  } else {
    request.count = options.count;
    i1 = std::min(options.count, n_fine);
  }

  ModeSet out;
  if (options.eigenfunctions) out.node_r = s.node_r();
  if (i1 <= i0) return out; // an empty window

  // Richardson partner mesh: every other node (discontinuities kept), its pencil the Galerkin
  // restriction of the fine one (identical to assembling it, see pencil_block.hpp).
  const std::optional<detail::MeshLevel> coarse =
      detail::coarsen(fine.nodes, rigid, pf, form.x, s.discontinuity_nodes());
  const TridiagonalPencil* pc = coarse ? &coarse->pencil : nullptr;

  // Nested iteration (nested_solve) when the every-other-node mesh is large enough for the
  // request; otherwise Spectra runs on the fine mesh directly.
  std::optional<PencilSpectrum> sc;
  PencilSpectrum sf;
  GuardCounts guards; // taken by the nested solve with the model mesh's verification
  bool nested = false;
  if (pc && static_cast<int>(pc->size()) >= 2 * i1 + 20) {
    if (auto both = nested_solve(pf, *coarse, form.x, s.discontinuity_nodes(), i0, i1, &guards)) {
      sf = std::move(both->first);
      sc = std::move(both->second);
      nested = true;
    }
  }
  if (!nested) {
    sf = solve_pencil(pf, request);
    if (options.richardson && pc && !sf.pairs.empty()) {
      PencilRequest rc;
      rc.first = sf.pairs.front().index;
      rc.count = sf.pairs.back().index - rc.first + 1;
      sc = solve_pencil(*pc, rc);
    }
  }
  if (!options.window_lo_omega2 && options.count > n_fine) {
    sf.status = SolveStatus::fewer_modes;
    sf.message = "requested " + std::to_string(options.count) + " modes but the mesh has only " +
                 std::to_string(n_fine) + " unknowns";
  }
  out.status = sf.status;
  out.message = sf.message;
  out.iterations = sf.iterations;
  if (options.richardson && sc && sc->status != SolveStatus::ok)
    out.message += (out.message.empty() ? "" : "; ") + std::string("coarse mesh: ") + sc->message;
  if (!options.richardson) sc.reset();

  // Interpolation sensitivity: first-order change of each eigenvalue when the coefficients
  // come from every other table row.
  std::vector<double> dlambda;
  if (options.richardson && coarse)
    if (const Structure::RowSubset half(s, coarse->nodes);
        half.table_rows() >= StellarModel::min_points) // as every_other_row(s)
      dlambda = interpolation_change(s, half, coarse->nodes, form.x, pf, sf.pairs);

  std::vector<double> errors; // per pair, pencil units
  for (auto& e : sf.pairs) {
    ModeSolution m;
    m.trusted = true;
    m.order = e.index;
    m.inertia_multiplicity = e.multiplicity;
    m.residual = e.residual;
    m.residual_floor = e.residual_floor;
    m.omega2_fine = e.lambda * unit;
    m.omega2_coarse = m.omega2_fine;
    m.omega2 = m.omega2_fine;

    // Error estimate, pencil units: discretization (Richardson), interpolation between table
    // rows, residual and round-off.
    // Round-off: ten standard deviations of independent rounding errors (statistical; the
    // worst case grows like N^2 and is orders of magnitude above what is observed). (x is
    // normalized to x^T M x = 1.)
    double err = 2 * e.residual * std::abs(e.lambda) +
                 10 * eps * roundoff_scale(pf.k_diag, pf.k_off, e.x, 1.0);
    if (options.richardson) {
      const PencilEigenpair* partner = nullptr;
      if (sc)
        for (const auto& c : sc->pairs)
          if (c.index == e.index) partner = &c;
      if (partner) {
        m.omega2_coarse = partner->lambda * unit;
        m.omega2 = m.omega2_fine + (m.omega2_fine - m.omega2_coarse) / 3.0;
        err += std::abs(e.lambda - partner->lambda) / 3.0;
        // The coarse space is a subspace of the fine one, so its eigenvalues
        // cannot be lower (Courant–Fischer); a violation means the pairing is wrong.
        if (partner->lambda < e.lambda - count_margin(e.lambda, eng.scale))
          add_flag(m, "coarse-mesh eigenvalue below the fine one");
      } else {
        add_flag(m, "no coarse-mesh partner: no discretization error estimate");
      }
      if (!dlambda.empty()) {
        const double d = dlambda[static_cast<std::size_t>(&e - sf.pairs.data())];
        m.interpolation_error = std::abs(d) / 3.0 * unit;
        err += std::abs(d) / 3.0;
      } else {
        add_flag(m, "model too small to estimate the interpolation error");
      }
    }
    m.error_estimate = err * unit;

    // xi at every node (0 at a rigid inner node), normalized to xi(R) = 1.
    // (Nodes without an unknown, a rigid inner node, have xi = 0; the node count, which
    // neither a scale factor nor those zeros change, is taken from x itself.)
    const AbsRange range = abs_range(e.x);
    const std::size_t surface_node = s.node_r().size() - 1;
    const double surface = pf.node.back() == surface_node ? e.x.back() : 0.0;
    const double by = std::abs(surface) > 1e-8 * range.max ? surface : range.max;
    if (by != surface) add_flag(m, "xi(R) is close to zero: normalized to max |xi| = 1 instead");
    if (options.eigenfunctions) m.xi = scaled_at_nodes(e.x, pf.node, out.node_r.size(), by);
    m.nodes = count_nodes(e.x, range);
    m.order_agrees = m.nodes == m.order;

    if (!m.order_agrees)
      add_flag(m, "order from inertia (" + std::to_string(m.order) + ") and node count (" +
                      std::to_string(m.nodes) + ") disagree");
    if (m.inertia_multiplicity != 1)
      add_flag(m, "inertia sees " + std::to_string(m.inertia_multiplicity) +
                      " eigenvalues at this omega^2");
    // A residual at the round-off level of the mesh is as small as arithmetic allows.
    if (!(m.residual <= std::max(1e-8, 10 * m.residual_floor))) add_flag(m, "large residual");
    errors.push_back(err);
    out.modes.push_back(std::move(m));
  }

  // Is each eigenvalue isolated within ten times its error estimate? Neighbours solved
  // together are compared directly; beyond the ends of the set, inertia counts tell (the counts
  // for all ends done together).
  const std::string crowded_flag = "error estimate large relative to the mode spacing";
  std::vector<double> shifts;
  std::vector<int> expected;
  std::vector<std::size_t> owner;
  for (std::size_t at = 0; at < sf.pairs.size(); ++at) {
    const PencilEigenpair& e = sf.pairs[at];
    const double err = errors[at];
    const bool below_known = at > 0 && sf.pairs[at - 1].index == e.index - 1;
    const bool above_known = at + 1 < sf.pairs.size() && sf.pairs[at + 1].index == e.index + 1;
    bool crowded = false;
    if (below_known) crowded = sf.pairs[at - 1].lambda >= e.lambda - 10 * err;
    else shifts.push_back(e.lambda - 10 * err), expected.push_back(e.index), owner.push_back(at);
    if (above_known) crowded = crowded || sf.pairs[at + 1].lambda <= e.lambda + 10 * err;
    else shifts.push_back(e.lambda + 10 * err), expected.push_back(e.index + 1), owner.push_back(at);
    if (crowded) add_flag(out.modes[at], crowded_flag);
  }
  // Counts at the ends of the set follow from the guard counts when the shift lies between a
  // guard point and the pair's own verified count point (lambda -+ margin): counts are
  // monotone, so equal counts at both give the count in between. The rest are counted.
  std::vector<int> counted(shifts.size(), -1);
  std::vector<double> to_count;
  for (std::size_t k = 0; k < shifts.size(); ++k) {
    const PencilEigenpair& e = sf.pairs[owner[k]];
    const double margin = count_margin(e.lambda, eng.scale);
    const bool low_end = expected[k] == e.index && e.lambda == guards.lambda_low &&
                         guards.count_below == e.index && shifts[k] >= guards.below &&
                         shifts[k] <= e.lambda - margin;
    const bool high_end = expected[k] == e.index + 1 && e.lambda == guards.lambda_high &&
                          guards.count_above == e.index + 1 && shifts[k] <= guards.above &&
                          shifts[k] >= e.lambda + margin;
    if (low_end || high_end) counted[k] = expected[k];
    else to_count.push_back(shifts[k]);
  }
  if (!to_count.empty()) {
    const std::vector<int> c = detail::inertia_below_many(pf, to_count);
    std::size_t next = 0;
    for (int& v : counted)
      if (v < 0) v = c[next++];
  }
  for (std::size_t k = 0; k < shifts.size(); ++k) {
    ModeSolution& m = out.modes[owner[k]];
    if (counted[k] != expected[k] && m.flag.find(crowded_flag) == std::string::npos)
      add_flag(m, crowded_flag);
  }
  for (ModeSolution& m : out.modes)
    if (!std::isfinite(m.omega2) || !std::isfinite(m.error_estimate)) {
      add_flag(m, "non-finite result");
      m.omega2 = m.omega2_fine;
      m.error_estimate = std::numeric_limits<double>::max();
    }
  return out;
}

} // namespace radmode
