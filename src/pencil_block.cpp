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
/// Written without branches (the end rows apart) so that the compiler can pair the shifts'
/// divisions in vector instructions; the operations per shift are the same, so are the counts.
template <std::size_t B> void count_block(const TridiagonalPencil& p, const double* s, int* out) {
  const std::size_t n = p.size();
  const double* const kd = p.k_diag.data();
  const double* const md = p.m_diag.data();
  const double* const ko = p.k_off.data();
  const double* const mo = p.m_off.data();
  double negative[B], d[B], e_prev[B], shift[B];
  for (std::size_t b = 0; b < B; ++b) {
    shift[b] = s[b];
    double piv = kd[0] - shift[b] * md[0];
    piv = piv == 0.0 ? -1e-300 : piv;
    negative[b] = piv < 0.0 ? 1.0 : 0.0;
    d[b] = piv;
  }
  for (std::size_t j = 1; j < n; ++j) {
    const double koj = ko[j - 1], moj = mo[j - 1], kdj = kd[j], mdj = md[j];
    for (std::size_t b = 0; b < B; ++b) {
      e_prev[b] = koj - shift[b] * moj;
      double piv = (kdj - shift[b] * mdj) - e_prev[b] * e_prev[b] / d[b];
      piv = piv == 0.0 ? -1e-300 : piv;
      negative[b] += piv < 0.0 ? 1.0 : 0.0;
      d[b] = piv;
    }
  }
  for (std::size_t b = 0; b < B; ++b) out[b] = static_cast<int>(negative[b]);
}

constexpr std::size_t zero_mark = static_cast<std::size_t>(-1); ///< a removed end: value 0
constexpr std::size_t end_mark = static_cast<std::size_t>(-2);  ///< ends a source list

/// The arithmetic of a Prolongation onto `fine`. gather(source) is called once with the
/// coarse nodes in base order, each given as a row of the coarse pencil (or zero_mark for a
/// removed end), the list ended by end_mark; it returns the coarse values laid out as the
/// caller wants. Then emit(j, k, t, values) for every fine row j: the value there is
/// (1 - t) * value k + t * value k + 1 of that list.
template <class Gather, class Emit>
void for_prolongation(const Prolongation& from, const TridiagonalPencil& fine, Gather&& gather,
                      Emit&& emit) {
  const std::vector<double>& x = from.x;
  const TridiagonalPencil& coarse = from.coarse;
  const std::size_t last = x.size() - 1;
  std::vector<std::size_t> cn, source; // base node and coarse row of each coarse node
  cn.reserve(coarse.size() + 2);
  source.reserve(coarse.size() + 3);
  if (coarse.node.front() != 0) {
    cn.push_back(0);
    source.push_back(zero_mark);
  }
  for (std::size_t i = 0; i < coarse.size(); ++i) {
    cn.push_back(coarse.node[i]);
    source.push_back(i);
  }
  if (cn.back() != last) {
    cn.push_back(last);
    source.push_back(zero_mark);
  }
  source.push_back(end_mark);
  const double* values = gather(source.data());
  std::size_t k = 0;
  for (std::size_t j = 0; j < fine.size(); ++j) {
    const std::size_t b = fine.node[j];
    while (k + 2 < cn.size() && cn[k + 1] < b) ++k;
    const double t = (x[b] - x[cn[k]]) / (x[cn[k + 1]] - x[cn[k]]);
    emit(j, k, t, values);
  }
}

/// Work arrays of the block iteration, kept per thread and reused: allocating and zeroing
/// them for every call cost as much as the arithmetic.
struct Workspace {
  std::vector<double> x, y, dinv;
  void reserve(std::size_t size) {
    for (auto* v : {&x, &y, &dinv})
      if (v->size() < size) v->resize(size);
  }
};
thread_local Workspace t_work;

/// B vectors under Rayleigh quotient iteration, held interleaved (x[j * B + b]) in the thread's
/// workspace from the first step to the last. The stored columns are unnormalized: vector b
/// is x[. * B + b] * m_scale[b], the scale applied where the vector is used (in the next
/// step's M x, the residual, the copy out), so that no pass over the mesh is spent on
/// normalizing. A step is two passes: (1) M x, the LDL^T factorization of K - s M and the
/// forward substitution together (the Thomas algorithm); (2) the diagonal scaling, the
/// backward substitution, max |y| and the Rayleigh quotient of y, whose row products are
/// formed as soon as the backward sweep has passed a row's neighbours. Values carried from
/// row to row stay in registers, so the passes run at the latency of their recurrences, which
/// the B independent columns overlap, and the memory traffic per step is a few reads and
/// writes of each array (this is what bounds the speed once the arrays leave the caches).
template <std::size_t B> class RqiBlock {
public:
  RqiBlock(const TridiagonalPencil& p, double kmax, double mmax)
      : m_p(p), m_n(p.size()), m_kmax(kmax), m_mmax(mmax) {
    t_work.reserve(m_n * B);
    for (std::size_t b = 0; b < B; ++b) m_scale[b] = 1.0;
  }

  /// The vectors xs[b] (of the pencil's size, or with `from` of the coarser pencil, then
  /// interpolated as they are read).
  void load(std::vector<double>* const* xs, const Prolongation* from) {
    double* const x = t_work.x.data();
    if (!from) {
      for (std::size_t j = 0; j < m_n; ++j)
        for (std::size_t b = 0; b < B; ++b) x[j * B + b] = (*xs[b])[j];
      return;
    }
    const std::size_t coarse_values = from->coarse.size() + 3; // with both ends and the mark
    if (t_work.y.size() < coarse_values * B) t_work.y.resize(coarse_values * B);
    for_prolongation(*from, m_p, [&](const std::size_t* source) {
      double* c = t_work.y.data(); // the coarse values, interleaved
      for (std::size_t i = 0; source[i] != end_mark; ++i)
        for (std::size_t b = 0; b < B; ++b) c[i * B + b] = source[i] == zero_mark ? 0.0 : (*xs[b])[source[i]];
      return c;
    }, [&](std::size_t j, std::size_t k, double t, const double* c) {
      for (std::size_t b = 0; b < B; ++b) x[j * B + b] = (1 - t) * c[k * B + b] + t * c[(k + 1) * B + b];
    });
  }

  /// *xs[b] = vector b as it now stands (resized to the pencil's size), for every b with
  /// which[b], in one pass over the block.
  void store(const bool* which, std::vector<double>* const* xs) const {
    double* out[B];
    std::size_t k = 0;
    std::size_t column[B];
    double s[B];
    for (std::size_t b = 0; b < B; ++b) {
      if (!which[b]) continue;
      xs[b]->resize(m_n);
      out[k] = xs[b]->data();
      column[k] = b;
      s[k++] = m_scale[b];
    }
    const double* const x = t_work.x.data();
    if (k == B) { // the usual case: every column, a fixed inner loop
      for (std::size_t j = 0; j < m_n; ++j)
        for (std::size_t b = 0; b < B; ++b) out[b][j] = x[j * B + b] * s[b];
      return;
    }
    for (std::size_t j = 0; j < m_n; ++j)
      for (std::size_t c = 0; c < k; ++c) out[c][j] = x[j * B + column[c]] * s[c];
  }

  /// Rayleigh quotients of the vectors, summed as x . (K x): the row sums cancel locally, where
  /// sum K_ij x_i x_j term by term would lose ~1e-9 relative to cancellation on a 2,000-point
  /// mesh.
  void quotients(double* rho) const {
    double vkv[B] = {}, vmv[B] = {};
    for_products(t_work.x.data(), [&](std::size_t b, double c, double kv, double mv, double, double) {
      vkv[b] += c * kv;
      vmv[b] += c * mv;
    });
    for (std::size_t b = 0; b < B; ++b) rho[b] = vkv[b] / vmv[b];
  }

  /// y = (K - s M)^{-1} M x per column, into the second work array; q[b] its Rayleigh
  /// quotient, ymy[b] = y^T M y and big[b] = max |y|. The vectors are not changed until
  /// accept().
  void step(const double* s, double* q, double* ymy, double* big) {
    const std::size_t n = m_n;
    const double* const x = t_work.x.data();
    double* const y = t_work.y.data();
    double* const dv = t_work.dinv.data();
    const double* const kd = m_p.k_diag.data();
    const double* const md = m_p.m_diag.data();
    const double* const ko = m_p.k_off.data();
    const double* const mo = m_p.m_off.data();
    double floor[B], l_prev[B], y_prev[B];
    for (std::size_t b = 0; b < B; ++b) {
      floor[b] = (m_kmax + std::abs(s[b]) * m_mmax) * eps * eps;
      l_prev[b] = 0.0;
      y_prev[b] = 0.0;
    }
    // (1) factor + forward substitution (the end rows apart: no tests in the inner loop).
    static constexpr double zeros[B] = {};
    auto forward = [&](std::size_t j, double kdj, double mdj, double ko_prev, double mo_prev,
                       double koj, double moj, const double* xl, const double* xr) {
      const double* xc = x + j * B;
      for (std::size_t b = 0; b < B; ++b) {
        const double mx = (mdj * xc[b] + mo_prev * xl[b] + moj * xr[b]) * m_scale[b];
        double d = kdj - s[b] * mdj - l_prev[b] * (ko_prev - s[b] * mo_prev);
        if (std::abs(d) < floor[b]) d = d < 0 ? -floor[b] : floor[b]; // singular: stay finite
        const double dinv = 1.0 / d;
        y_prev[b] = mx - l_prev[b] * y_prev[b];
        l_prev[b] = (koj - s[b] * moj) * dinv;
        y[j * B + b] = y_prev[b];
        dv[j * B + b] = dinv;
      }
    };
    {
      const auto [kd0, md0, ko_prev, mo_prev, ko0, mo0] = row(0);
      forward(0, kd0, md0, ko_prev, mo_prev, ko0, mo0, zeros, n > 1 ? x + B : zeros);
    }
    for (std::size_t j = 1; j + 1 < n; ++j)
      forward(j, kd[j], md[j], ko[j - 1], mo[j - 1], ko[j], mo[j], x + (j - 1) * B, x + (j + 1) * B);
    if (n > 1) {
      const auto [kdl, mdl, ko_prev, mo_prev, kol, mol] = row(n - 1);
      forward(n - 1, kdl, mdl, ko_prev, mo_prev, kol, mol, x + (n - 2) * B, zeros);
    }
    // (2) scaling + backward substitution (l_j recomputed from 1/d_j rather than stored),
    // with the quotient of y: once y_j is known, row j + 1 of K y and M y is complete.
    double y1[B], y2[B], ykv[B], ymv[B]; // y_{j+1}, y_{j+2}, running sums
    for (std::size_t b = 0; b < B; ++b) {
      const std::size_t i = (n - 1) * B + b;
      y1[b] = y[i] * dv[i];
      y[i] = y1[b];
      big[b] = std::abs(y1[b]);
      y2[b] = ykv[b] = ymv[b] = 0.0;
    }
    // Row j of the sweep; kd1, md1: diagonal of row j + 1; ko1, mo1: its upper neighbour.
    auto backward = [&](std::size_t j, double koj, double moj, double kd1, double md1, double ko1,
                        double mo1) {
      for (std::size_t b = 0; b < B; ++b) {
        const std::size_t i = j * B + b;
        const double l = (koj - s[b] * moj) * dv[i];
        const double y0 = y[i] * dv[i] - l * y1[b];
        y[i] = y0;
        big[b] = std::max(big[b], std::abs(y0));
        const double kv = kd1 * y1[b] + koj * y0 + ko1 * y2[b];
        const double mv = md1 * y1[b] + moj * y0 + mo1 * y2[b];
        ykv[b] += y1[b] * kv;
        ymv[b] += y1[b] * mv;
        y2[b] = y1[b];
        y1[b] = y0;
      }
    };
    if (n > 1) backward(n - 2, ko[n - 2], mo[n - 2], kd[n - 1], md[n - 1], 0.0, 0.0);
    for (std::size_t j = n - 2; j-- > 0;) backward(j, ko[j], mo[j], kd[j + 1], md[j + 1], ko[j + 1], mo[j + 1]);
    const double ko0 = n > 1 ? ko[0] : 0.0, mo0 = n > 1 ? mo[0] : 0.0;
    for (std::size_t b = 0; b < B; ++b) { // row 0
      ykv[b] += y1[b] * (kd[0] * y1[b] + ko0 * y2[b]);
      ymv[b] += y1[b] * (md[0] * y1[b] + mo0 * y2[b]);
      q[b] = ykv[b] / ymv[b];
      ymy[b] = ymv[b];
    }
  }

  /// The vectors become those of the last step, vector b scaled by scale[b].
  void accept(const double* scale) {
    std::swap(t_work.x, t_work.y);
    for (std::size_t b = 0; b < B; ++b) m_scale[b] = scale[b];
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
      const double s = m_scale[b]; // the norms of the scaled vector
      stats[b].r_norm = std::sqrt(r2[b]) * s;
      stats[b].kx_norm = std::sqrt(k2[b]) * s;
      stats[b].mx_norm = std::sqrt(m2[b]) * s;
      stats[b].a_norm = std::sqrt(a2[b]) * s;
    }
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

  const TridiagonalPencil& m_p;
  std::size_t m_n;
  double m_kmax, m_mmax;
  double m_scale[B];
};

/// rayleigh_iterate for one block of B vectors (see pencil_block.hpp for the rules).
template <std::size_t B>
void iterate_block(const TridiagonalPencil& p, std::vector<double>* const* xs, const double* first_shift,
                   int min_steps, int max_steps, double scale, double residual_tol, double kmax,
                   double mmax, const Prolongation* from, RqiStats* stats) {
  constexpr double nan = std::numeric_limits<double>::quiet_NaN();
  RqiBlock<B> block(p, kmax, mmax);
  block.load(xs, from);
  double rho[B], previous[B], res[B];
  bool active[B];
  bool quotient_needed = false;
  for (std::size_t b = 0; b < B; ++b) {
    rho[b] = previous[b] = res[b] = nan;
    active[b] = true;
    stats[b] = RqiStats{nan, nan, nan, nan, nan, nan, 0};
    quotient_needed = quotient_needed || std::isnan(first_shift[b]);
  }
  if (quotient_needed) block.quotients(rho);
  for (int it = 0; it < max_steps; ++it) {
    bool any = false, done[B] = {};
    for (std::size_t b = 0; b < B; ++b) {
      if (!active[b]) continue;
      // Converged once the quotient stops moving (cubic convergence: another step would change
      // nothing) or the residual is small enough.
      if (it >= min_steps &&
          std::abs(rho[b] - previous[b]) <= 1e-14 * std::abs(rho[b]) + 4 * eps * scale)
        active[b] = false;
      if (residual_tol > 0 && res[b] <= residual_tol) active[b] = false;
      previous[b] = rho[b];
      if (active[b]) any = true;
      else done[b] = true;
    }
    block.store(done, xs); // the vectors that have converged
    if (!any) return;
    double shift[B], q[B], ymy[B], big[B], next_scale[B];
    for (std::size_t b = 0; b < B; ++b) {
      shift[b] = it == 0 && !std::isnan(first_shift[b]) ? first_shift[b] : rho[b];
      if (!std::isfinite(shift[b])) shift[b] = 0.0;
    }
    block.step(shift, q, ymy, big);
    bool failed[B] = {};
    for (std::size_t b = 0; b < B; ++b) {
      next_scale[b] = 0.0; // columns no longer followed: anything finite
      if (!active[b]) continue;
      if (!(big[b] > 0 && std::isfinite(big[b]) && std::isfinite(q[b]))) {
        failed[b] = true; // zero or non-finite: keep the last good vector
        active[b] = false;
        continue;
      }
      next_scale[b] = 1.0 / big[b];
      rho[b] = q[b];
      stats[b] = {q[b], ymy[b] * next_scale[b] * next_scale[b], nan, nan, nan, nan, 0};
    }
    for (std::size_t b = 0; b < B; ++b) stats[b].steps = it + 1;
    block.store(failed, xs);
    block.accept(next_scale);
    if (residual_tol > 0) {
      double r[B];
      RqiStats st[B];
      block.residuals(rho, r, st);
      for (std::size_t b = 0; b < B; ++b) {
        if (!active[b]) continue;
        res[b] = r[b];
        stats[b].r_norm = st[b].r_norm;
        stats[b].kx_norm = st[b].kx_norm;
        stats[b].mx_norm = st[b].mx_norm;
        stats[b].a_norm = st[b].a_norm;
      }
    }
  }
  block.store(active, xs);
}

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
                                     const std::vector<double>& first_shifts,
                                     const Prolongation* from) {
  const std::size_t expected = from ? from->coarse.size() : p.size();
  for (const auto& x : xs)
    if (x.size() != expected) throw UsageError("Rayleigh quotient iteration: vector of the wrong size");
  double kmax = 0, mmax = 0;
  for (std::size_t j = 0; j < p.size(); ++j) {
    kmax = std::max(kmax, std::abs(p.k_diag[j]));
    mmax = std::max(mmax, p.m_diag[j]);
  }
  const std::size_t count = xs.size();
  const double nan = std::numeric_limits<double>::quiet_NaN();
  std::vector<RqiStats> stats(count, RqiStats{nan, nan, nan, nan, nan, nan, 0});
  // Blocks of up to max_width vectors, each iterated to the end on its own (a vector that has
  // converged rides along with its block at no extra pass over the mesh).
  for_chunks(count, [&](std::size_t first, std::size_t width) {
    std::vector<double>* ptr[max_width];
    double given[max_width];
    for (std::size_t b = 0; b < width; ++b) {
      const std::size_t i = first + b;
      ptr[b] = &xs[i];
      given[b] = i < first_shifts.size() ? first_shifts[i] : nan;
    }
    with_width(width, [&](auto w) {
      iterate_block<decltype(w)::value>(p, ptr, given, min_steps, max_steps, scale, residual_tol,
                                        kmax, mmax, from, &stats[first]);
    });
  });
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
