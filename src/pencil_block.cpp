#include "pencil_block.hpp"

#include "radmode/error.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <type_traits>

namespace radmode::detail {

namespace {

constexpr double eps = std::numeric_limits<double>::epsilon();

/// Largest number of shifts or vectors advanced together.
constexpr std::size_t max_width = 8;

/// Calls f(std::integral_constant<std::size_t, B>{}) for B = width (1..max_width).
template <class F> void with_width(std::size_t width, F&& f) {
  switch (width) {
  case 1: f(std::integral_constant<std::size_t, 1>{}); break;
  case 2: f(std::integral_constant<std::size_t, 2>{}); break;
  case 3: f(std::integral_constant<std::size_t, 3>{}); break;
  case 4: f(std::integral_constant<std::size_t, 4>{}); break;
  case 5: f(std::integral_constant<std::size_t, 5>{}); break;
  case 6: f(std::integral_constant<std::size_t, 6>{}); break;
  case 7: f(std::integral_constant<std::size_t, 7>{}); break;
  default: f(std::integral_constant<std::size_t, 8>{}); break;
  }
}

/// Splits `total` items into chunks of at most max_width, as even as possible, and calls
/// chunk(first, width) for each.
template <class F> void for_chunks(std::size_t total, F&& chunk) {
  if (total == 0) return;
  const std::size_t chunks = (total + max_width - 1) / max_width;
  std::size_t first = 0;
  for (std::size_t c = 0; c < chunks; ++c) {
    const std::size_t width = (total - first + (chunks - c) - 1) / (chunks - c);
    chunk(first, width);
    first += width;
  }
}

/// Inertia counts for B shifts: the arithmetic of inertia_below (discretize.cpp), per shift.
template <std::size_t B> void count_block(const TridiagonalPencil& p, const double* s, int* out) {
  const std::size_t n = p.size();
  int negative[B];
  double d[B], e_prev[B];
  for (std::size_t b = 0; b < B; ++b) {
    negative[b] = 0;
    d[b] = 1.0;
    e_prev[b] = 0.0;
  }
  for (std::size_t j = 0; j < n; ++j) {
    const double kd = p.k_diag[j], md = p.m_diag[j];
    for (std::size_t b = 0; b < B; ++b) {
      double piv = kd - s[b] * md;
      if (j > 0) piv -= e_prev[b] * e_prev[b] / d[b];
      if (piv == 0.0) piv = -1e-300;
      if (piv < 0.0) ++negative[b];
      d[b] = piv;
    }
    if (j + 1 < n) {
      const double ko = p.k_off[j], mo = p.m_off[j];
      for (std::size_t b = 0; b < B; ++b) e_prev[b] = ko - s[b] * mo;
    }
  }
  for (std::size_t b = 0; b < B; ++b) out[b] = negative[b];
}

/// Work arrays of the block step, kept per thread and reused: allocating and zeroing them
/// for every step cost as much as the arithmetic.
struct Workspace {
  std::vector<double> x, y, l, dinv;
  void reserve(std::size_t size) {
    for (auto* v : {&x, &y, &l, &dinv})
      if (v->size() < size) v->resize(size);
  }
};
thread_local Workspace t_work;

/// One Rayleigh quotient iteration step for B vectors, held interleaved (x[j * B + b]) in the
/// thread's workspace. A step is three passes over the mesh: (1) M x, the LDL^T factorization
/// of K - rho M and the forward substitution together (the Thomas algorithm); (2) the
/// diagonal scaling and the backward substitution, with max |y|; (3) the new x = y / max |y|
/// and its Rayleigh quotient (and, on request, a fourth pass for its residual). Values carried
/// from row to row stay in registers, so the passes run at the latency of their recurrences,
/// which the B independent columns overlap.
template <std::size_t B> class RqiStep {
public:
  RqiStep(const TridiagonalPencil& p, double kmax, double mmax)
      : m_p(p), m_n(p.size()), m_kmax(kmax), m_mmax(mmax) {
    t_work.reserve(m_n * B);
  }

  /// rho[b]: the quotient of xs[b] (NaN: computed here); on return the quotient of the new
  /// vector, and res[b] its residual (when `residual`), or unchanged with ok[b] = false when
  /// the step gave a zero or non-finite vector (xs[b] is then left as it was).
  /// `given`: shifts to use instead of the quotients (NaN: the quotient). `stats` receives
  /// the measurements of the new vectors (res: their relative residuals).
  void run(std::vector<double>* const* xs, const double* given, double* rho, bool residual,
           double* res, bool* ok, RqiStats* stats) {
    double* const x = t_work.x.data();
    for (std::size_t j = 0; j < m_n; ++j)
      for (std::size_t b = 0; b < B; ++b) x[j * B + b] = (*xs[b])[j];
    bool known = true;
    for (std::size_t b = 0; b < B; ++b) known = known && (!std::isnan(rho[b]) || !std::isnan(given[b]));
    if (!known) {
      double q[B];
      quotients(x, q);
      for (std::size_t b = 0; b < B; ++b)
        if (std::isnan(rho[b])) rho[b] = q[b];
    }
    double shift[B];
    for (std::size_t b = 0; b < B; ++b) {
      shift[b] = std::isnan(given[b]) ? rho[b] : given[b];
      if (!std::isfinite(shift[b])) shift[b] = 0.0;
    }
    double xmx[B];
    step(shift, rho, ok, xmx);
    for (std::size_t b = 0; b < B; ++b) stats[b] = {rho[b], xmx[b], nan_, nan_, nan_, nan_};
    if (residual) residuals(rho, res, stats);
    for (std::size_t j = 0; j < m_n; ++j)
      for (std::size_t b = 0; b < B; ++b)
        if (ok[b]) (*xs[b])[j] = x[j * B + b];
  }

private:
  /// Row j of the pencil: K_jj, M_jj, K_j,j-1, M_j,j-1, K_j,j+1, M_j,j+1 (0 beyond the ends).
  struct Row {
    double kd, md, ko_prev, mo_prev, ko, mo;
  };
  Row row(std::size_t j) const {
    const bool first = j == 0, last = j + 1 == m_n;
    return {m_p.k_diag[j], m_p.m_diag[j], first ? 0.0 : m_p.k_off[j - 1],
            first ? 0.0 : m_p.m_off[j - 1], last ? 0.0 : m_p.k_off[j], last ? 0.0 : m_p.m_off[j]};
  }

  /// Calls f(b, v_jb, (K v)_jb, (M v)_jb, (|K||v|)_jb, (|M||v|)_jb) for every row j and column
  /// b of the interleaved v (the end rows apart, so that the inner loop has no tests).
  template <class F> void for_products(const double* v, F&& f) const {
    const std::size_t n = m_n;
    static constexpr double zeros[B] = {};
    auto rows = [&](std::size_t j, const double* l, const double* r) {
      const auto [kd, md, ko_prev, mo_prev, ko, mo] = row(j);
      const double* c = v + j * B;
      for (std::size_t b = 0; b < B; ++b)
        f(b, c[b], kd * c[b] + ko_prev * l[b] + ko * r[b], md * c[b] + mo_prev * l[b] + mo * r[b],
          std::abs(kd * c[b]) + std::abs(ko_prev * l[b]) + std::abs(ko * r[b]),
          std::abs(md * c[b]) + std::abs(mo_prev * l[b]) + std::abs(mo * r[b]));
    };
    rows(0, zeros, n > 1 ? v + B : zeros);
    const double* const kd = m_p.k_diag.data();
    const double* const md = m_p.m_diag.data();
    const double* const ko = m_p.k_off.data();
    const double* const mo = m_p.m_off.data();
    for (std::size_t j = 1; j + 1 < n; ++j) {
      const double* l = v + (j - 1) * B;
      const double* c = l + B;
      const double* r = c + B;
      for (std::size_t b = 0; b < B; ++b)
        f(b, c[b], kd[j] * c[b] + ko[j - 1] * l[b] + ko[j] * r[b],
          md[j] * c[b] + mo[j - 1] * l[b] + mo[j] * r[b],
          std::abs(kd[j] * c[b]) + std::abs(ko[j - 1] * l[b]) + std::abs(ko[j] * r[b]),
          std::abs(md[j] * c[b]) + std::abs(mo[j - 1] * l[b]) + std::abs(mo[j] * r[b]));
    }
    if (n > 1) rows(n - 1, v + (n - 2) * B, zeros);
  }

  /// Rayleigh quotients of the interleaved columns of v, summed as v . (K v): the row sums
  /// cancel locally, where sum K_ij v_i v_j term by term would lose ~1e-9 relative to
  /// cancellation on a 2,000-point mesh.
  void quotients(const double* v, double* rho, double* vmv_out = nullptr) const {
    double vkv[B] = {}, vmv[B] = {};
    for_products(v, [&](std::size_t b, double c, double kv, double mv, double, double) {
      vkv[b] += c * kv;
      vmv[b] += c * mv;
    });
    for (std::size_t b = 0; b < B; ++b) {
      rho[b] = vkv[b] / vmv[b];
      if (vmv_out) vmv_out[b] = vmv[b];
    }
  }

  /// ||K x - rho M x|| / (||K x|| + |rho| ||M x||) per column, the norms, and the residual's
  /// round-off level eps || |K||x| + |rho||M||x| || / (same denominator): res[b] is reported as
  /// 0 when below ten times that level (iterating cannot lower it further).
  void residuals(const double* rho, double* res, RqiStats* stats) const {
    double r2[B] = {}, k2[B] = {}, m2[B] = {}, a2[B] = {};
    for_products(t_work.x.data(), [&](std::size_t b, double, double kx, double mx, double ak, double am) {
      const double e = kx - rho[b] * mx, a = ak + std::abs(rho[b]) * am;
      r2[b] += e * e;
      k2[b] += kx * kx;
      m2[b] += mx * mx;
      a2[b] += a * a;
    });
    for (std::size_t b = 0; b < B; ++b) {
      const double denom = std::sqrt(k2[b]) + std::abs(rho[b]) * std::sqrt(m2[b]);
      const double floor = denom > 0 ? eps * std::sqrt(a2[b]) / denom : 0.0;
      res[b] = denom > 0 ? std::sqrt(r2[b]) / denom : 0.0;
      if (res[b] <= 10 * floor) res[b] = 0.0;
      stats[b].r_norm = std::sqrt(r2[b]);
      stats[b].kx_norm = std::sqrt(k2[b]);
      stats[b].mx_norm = std::sqrt(m2[b]);
      stats[b].a_norm = std::sqrt(a2[b]);
    }
  }


  /// y = (K - s M)^{-1} M x per column; usable columns take x = y / max|y| and rho = its
  /// quotient (ok[b] says which).
  void step(const double* s, double* rho, bool* ok, double* xmx) {
    const std::size_t n = m_n;
    double* const x = t_work.x.data();
    double* const y = t_work.y.data();
    double* const lv = t_work.l.data();
    double* const dv = t_work.dinv.data();
    double floor[B], l_prev[B], y_prev[B];
    for (std::size_t b = 0; b < B; ++b) {
      floor[b] = (m_kmax + std::abs(s[b]) * m_mmax) * eps * eps;
      l_prev[b] = 0.0;
      y_prev[b] = 0.0;
    }
    // (1) factor + forward substitution (the end rows apart: no tests in the inner loop).
    static constexpr double zeros[B] = {};
    auto forward = [&](std::size_t j, double kd, double md, double ko_prev, double mo_prev,
                       double ko, double mo, const double* xl, const double* xr) {
      const double* xc = x + j * B;
      for (std::size_t b = 0; b < B; ++b) {
        const double mx = md * xc[b] + mo_prev * xl[b] + mo * xr[b];
        double d = kd - s[b] * md - l_prev[b] * (ko_prev - s[b] * mo_prev);
        if (std::abs(d) < floor[b]) d = d < 0 ? -floor[b] : floor[b]; // singular: stay finite
        const double dinv = 1.0 / d;
        y_prev[b] = mx - l_prev[b] * y_prev[b];
        l_prev[b] = (ko - s[b] * mo) * dinv;
        y[j * B + b] = y_prev[b];
        lv[j * B + b] = l_prev[b];
        dv[j * B + b] = dinv;
      }
    };
    {
      const auto [kd, md, ko_prev, mo_prev, ko, mo] = row(0);
      forward(0, kd, md, ko_prev, mo_prev, ko, mo, zeros, n > 1 ? x + B : zeros);
    }
    for (std::size_t j = 1; j + 1 < n; ++j)
      forward(j, m_p.k_diag[j], m_p.m_diag[j], m_p.k_off[j - 1], m_p.m_off[j - 1], m_p.k_off[j],
              m_p.m_off[j], x + (j - 1) * B, x + (j + 1) * B);
    if (n > 1) {
      const auto [kd, md, ko_prev, mo_prev, ko, mo] = row(n - 1);
      forward(n - 1, kd, md, ko_prev, mo_prev, ko, mo, x + (n - 2) * B, zeros);
    }
    // (2) scaling + backward substitution.
    double next[B], big[B];
    for (std::size_t b = 0; b < B; ++b) next[b] = big[b] = 0.0;
    for (std::size_t j = n; j-- > 0;) {
      for (std::size_t b = 0; b < B; ++b) {
        next[b] = y[j * B + b] * dv[j * B + b] - lv[j * B + b] * next[b];
        y[j * B + b] = next[b];
        big[b] = std::max(big[b], std::abs(next[b]));
      }
    }
    // (3) new x and its quotient.
    double q[B], ymy[B];
    quotients(y, q, ymy);
    double inv[B];
    for (std::size_t b = 0; b < B; ++b) {
      ok[b] = big[b] > 0 && std::isfinite(big[b]) && std::isfinite(q[b]);
      inv[b] = ok[b] ? 1.0 / big[b] : 0.0;
      xmx[b] = ymy[b] * inv[b] * inv[b];
      if (ok[b]) rho[b] = q[b];
    }
    for (std::size_t j = 0; j < n; ++j)
      for (std::size_t b = 0; b < B; ++b) x[j * B + b] = y[j * B + b] * inv[b];
  }

  static constexpr double nan_ = std::numeric_limits<double>::quiet_NaN();
  const TridiagonalPencil& m_p;
  std::size_t m_n;
  double m_kmax, m_mmax;
};

} // namespace

std::vector<int> inertia_below_many(const TridiagonalPencil& p, const std::vector<double>& shifts) {
  std::vector<int> counts(shifts.size(), 0);
  for_chunks(shifts.size(), [&](std::size_t first, std::size_t width) {
    with_width(width, [&](auto w) { count_block<decltype(w)::value>(p, &shifts[first], &counts[first]); });
  });
  return counts;
}

std::vector<RqiStats> rayleigh_iterate(const TridiagonalPencil& p,
                                     std::vector<std::vector<double>>& xs, int min_steps,
                                     int max_steps, double scale, double residual_tol,
                                     const std::vector<double>& first_shifts) {
  for (const auto& x : xs)
    if (x.size() != p.size()) throw UsageError("Rayleigh quotient iteration: vector of the wrong size");
  double kmax = 0, mmax = 0;
  for (std::size_t j = 0; j < p.size(); ++j) {
    kmax = std::max(kmax, std::abs(p.k_diag[j]));
    mmax = std::max(mmax, p.m_diag[j]);
  }
  const std::size_t count = xs.size();
  const double nan = std::numeric_limits<double>::quiet_NaN();
  std::vector<double> rho(count, nan), previous(count, nan), res(count, nan);
  std::vector<RqiStats> stats(count, RqiStats{nan, nan, nan, nan, nan, nan});
  std::vector<char> active(count, 1);
  for (int it = 0; it < max_steps; ++it) {
    // Each round steps only the vectors still active, in blocks of up to max_width.
    std::vector<std::size_t> todo;
    for (std::size_t i = 0; i < count; ++i) {
      if (!active[i]) continue;
      // Converged once the quotient stops moving (cubic convergence: another step would change
      // nothing) or the residual is small enough.
      if (it >= min_steps &&
          std::abs(rho[i] - previous[i]) <= 1e-14 * std::abs(rho[i]) + 4 * eps * scale)
        active[i] = 0;
      if (residual_tol > 0 && res[i] <= residual_tol) active[i] = 0;
      previous[i] = rho[i];
      if (active[i]) todo.push_back(i);
    }
    if (todo.empty()) break;
    for_chunks(todo.size(), [&](std::size_t first, std::size_t width) {
      std::vector<double>* ptr[max_width];
      double r[max_width], e[max_width], given[max_width];
      bool ok[max_width];
      RqiStats st[max_width];
      for (std::size_t b = 0; b < width; ++b) {
        const std::size_t i = todo[first + b];
        ptr[b] = &xs[i];
        r[b] = rho[i];
        given[b] = it == 0 && i < first_shifts.size() ? first_shifts[i] : nan;
      }
      with_width(width, [&](auto w) {
        RqiStep<decltype(w)::value>(p, kmax, mmax).run(ptr, given, r, residual_tol > 0, e, ok, st);
      });
      for (std::size_t b = 0; b < width; ++b) {
        const std::size_t i = todo[first + b];
        if (!ok[b]) {
          active[i] = 0; // zero or non-finite: keep the last good vector
          continue;
        }
        rho[i] = r[b];
        res[i] = e[b];
        stats[i] = st[b];
      }
    });
  }
  return stats;
}

std::optional<MeshLevel> coarsen(const std::vector<std::size_t>& fn, bool fix_first,
                                 const TridiagonalPencil& pf, const std::vector<double>& x,
                                 const std::vector<bool>& keep_base) {
  std::vector<bool> keep(fn.size(), false);
  for (std::size_t i = 0; i < fn.size(); ++i) keep[i] = fn[i] < keep_base.size() && keep_base[fn[i]];
  const std::vector<std::size_t> pos = every_other_node(fn.size() - 1, keep); // in fn
  MeshLevel c;
  c.fix_first = fix_first;
  c.nodes.reserve(pos.size());
  for (const std::size_t i : pos) c.nodes.push_back(fn[i]);
  const std::size_t first = fix_first ? 1 : 0; // first node (of either list) with an unknown
  const std::size_t nc = c.nodes.size() - first;
  if (nc < 2) return std::nullopt;
  if (pf.size() + first != fn.size()) throw UsageError("coarse mesh: fine pencil and node list differ");

  // Consecutive coarse nodes are either neighbours on the fine list or have one fine node m
  // between them, interpolated as (1 - t) u_J + t u_{J+1}. With A the fine matrix (entries of
  // a removed Dirichlet node are 0), P^T A P is, per coarse node J at fine position f with
  // midpoints m- (weight t- of J) before and m+ (weight 1 - t+ of J) after it,
  //   A_c(J, J)     = A(f, f) + 2 w- A(m-, f) + w-^2 A(m-, m-) + 2 w+ A(f, m+) + w+^2 A(m+, m+)
  //   A_c(J, J + 1) = A(f, f+1)                                        (neighbours)
  //                 = t A(f, m) + t (1 - t) A(m, m) + (1 - t) A(m, f')   (midpoint m)
  // which equals assembling the coarse elements directly (nested spaces, shared quadrature).
  auto diag = [&](const std::vector<double>& d, std::size_t i) { return i < first ? 0.0 : d[i - first]; };
  auto off = [&](const std::vector<double>& o, std::size_t i) { return i < first ? 0.0 : o[i - first]; };
  TridiagonalPencil& pc = c.pencil;
  pc.k_diag.assign(nc, 0.0);
  pc.m_diag.assign(nc, 0.0);
  pc.k_off.assign(nc - 1, 0.0);
  pc.m_off.assign(nc - 1, 0.0);
  pc.node.assign(c.nodes.begin() + static_cast<std::ptrdiff_t>(first), c.nodes.end());
  const std::size_t last = pos.size() - 1;
  for (std::size_t J = first; J <= last; ++J) {
    const std::size_t f = pos[J];
    double kd = diag(pf.k_diag, f), md = diag(pf.m_diag, f);
    if (J > 0 && pos[J - 1] + 2 == f) { // midpoint before
      const std::size_t m = f - 1;
      const double w = (x[fn[m]] - x[fn[pos[J - 1]]]) / (x[fn[f]] - x[fn[pos[J - 1]]]);
      kd += 2 * w * off(pf.k_off, m) + w * w * diag(pf.k_diag, m);
      md += 2 * w * off(pf.m_off, m) + w * w * diag(pf.m_diag, m);
    }
    if (J < last && pos[J + 1] == f + 2) { // midpoint after
      const std::size_t m = f + 1;
      const double w = (x[fn[pos[J + 1]]] - x[fn[m]]) / (x[fn[pos[J + 1]]] - x[fn[f]]);
      kd += 2 * w * off(pf.k_off, f) + w * w * diag(pf.k_diag, m);
      md += 2 * w * off(pf.m_off, f) + w * w * diag(pf.m_diag, m);
      const double t = 1.0 - w;
      pc.k_off[J - first] = t * off(pf.k_off, f) + t * w * diag(pf.k_diag, m) + w * off(pf.k_off, m);
      pc.m_off[J - first] = t * off(pf.m_off, f) + t * w * diag(pf.m_diag, m) + w * off(pf.m_off, m);
    } else if (J < last) { // neighbours
      pc.k_off[J - first] = off(pf.k_off, f);
      pc.m_off[J - first] = off(pf.m_off, f);
    }
    pc.k_diag[J - first] = kd;
    pc.m_diag[J - first] = md;
  }
  return c;
}

} // namespace radmode::detail
