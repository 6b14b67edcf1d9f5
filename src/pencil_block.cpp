#include "pencil_block.hpp"

#include "pair.hpp"

#include "radmode/error.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
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
  std::vector<double> rows; ///< per row of the last step's vector: K y, M y, |K||y|, |M||y|
  void reserve(std::size_t size) {
    for (auto* v : {&x, &y, &dinv})
      if (v->size() < size) v->resize(size);
  }
};
thread_local Workspace t_work;

/// Inertia counts for B shifts: the arithmetic of inertia_below (discretize.cpp), per shift,
/// two shifts to an instruction (Pair; an odd B gets a dummy shift whose count is dropped).
/// The operations per shift are the same, in the same order, so are the counts. A zero pivot
/// becomes -1e-300 behind a branch (rare, so predicted: the select stays off the chain of
/// dependent divisions, which bounds the speed for up to four shifts).
template <std::size_t B> void count_block(const TridiagonalPencil& p, const double* s, int* out) {
  constexpr std::size_t H = (B + 1) / 2;
  const std::size_t n = p.size();
  const double* const kd = p.k_diag.data();
  const double* const md = p.m_diag.data();
  const double* const ko = p.k_off.data();
  const double* const mo = p.m_off.data();
  const Pair tiny = {-1e-300, -1e-300};
  Pair shift[H], d[H];
  PairMask negative[H];
  for (std::size_t h = 0; h < H; ++h) {
    shift[h] = Pair{s[2 * h], 2 * h + 1 < B ? s[2 * h + 1] : 0.0};
    Pair piv = kd[0] - shift[h] * md[0];
    piv = piv == 0.0 ? tiny : piv;
    negative[h] = -(piv < 0.0); // a true comparison is -1 per lane
    d[h] = piv;
  }
  for (std::size_t j = 1; j < n; ++j) {
    const double koj = ko[j - 1], moj = mo[j - 1], kdj = kd[j], mdj = md[j];
    for (std::size_t h = 0; h < H; ++h) {
      const Pair e_prev = koj - shift[h] * moj;
      Pair piv = (kdj - shift[h] * mdj) - e_prev * e_prev / d[h];
      const PairMask zero = piv == 0.0;
      if (__builtin_expect((zero[0] | zero[1]) != 0, 0)) piv = zero ? tiny : piv; // off the chain
      negative[h] -= piv < 0.0;
      d[h] = piv;
    }
  }
  for (std::size_t b = 0; b < B; ++b) out[b] = static_cast<int>(negative[b / 2][b % 2]);
}

/// B vectors under Rayleigh quotient iteration, held interleaved (x[j * P + b], P = B rounded
/// up to even; an odd B gets a column of zeros) in the thread's workspace from the first step
/// to the last, and processed two columns at a time (Pair). The stored columns are
/// unnormalized: vector b is x[. * P + b] * scale[b], the scale applied where the vector is
/// used (in the next step's M x, the residual, the copy out), so that no pass over the mesh
/// is spent on normalizing. A step is two passes: (1) M x, the LDL^T factorization of K - s M
/// and the forward substitution together (the Thomas algorithm); (2) the diagonal scaling,
/// the backward substitution and the Rayleigh quotient of y, whose row products are formed as
/// soon as the backward sweep has passed a row's neighbours (when a residual is wanted, K y
/// and M y are kept and the sums of the norms, with |K||y| and |M||y| from the same terms,
/// formed in the sweep: residuals() is then a light pass over the kept rows).
/// Values carried from row to row
/// stay in registers, so the passes run at the latency of their recurrences, which the
/// independent columns overlap, and the memory traffic per step is a few reads and writes of
/// each array (this is what bounds the speed once the arrays leave the caches).
template <std::size_t B> class RqiBlock {
  static constexpr std::size_t P = (B + 1) / 2 * 2; ///< stored columns
  static constexpr std::size_t H = P / 2;           ///< pairs of columns

public:
  RqiBlock(const TridiagonalPencil& p, double kmax, double mmax)
      : m_p(p), m_n(p.size()), m_kmax(kmax), m_mmax(mmax) {
    t_work.reserve(m_n * P);
    for (std::size_t h = 0; h < H; ++h) m_scale[h] = Pair{1.0, 1.0};
  }

  /// The vectors xs[b] (of the pencil's size, or with `from` of the coarser pencil, then
  /// interpolated as they are read).
  void load(std::vector<double>* const* xs, const Prolongation* from) {
    double* const x = t_work.x.data();
    if (!from) {
      for (std::size_t j = 0; j < m_n; ++j) {
        for (std::size_t b = 0; b < B; ++b) x[j * P + b] = (*xs[b])[j];
        for (std::size_t b = B; b < P; ++b) x[j * P + b] = 0.0;
      }
      return;
    }
    const std::size_t coarse_values = from->coarse.size() + 3; // with both ends and the mark
    if (t_work.y.size() < coarse_values * P) t_work.y.resize(coarse_values * P);
    for_prolongation(*from, m_p, [&](const std::size_t* source) {
      double* c = t_work.y.data(); // the coarse values, interleaved
      for (std::size_t i = 0; source[i] != end_mark; ++i)
        for (std::size_t b = 0; b < P; ++b)
          c[i * P + b] = source[i] == zero_mark || b >= B ? 0.0 : (*xs[b])[source[i]];
      return c;
    }, [&](std::size_t j, std::size_t k, double t, const double* c) {
      for (std::size_t h = 0; h < H; ++h)
        store2(x + j * P + 2 * h, (1 - t) * load2(c + k * P + 2 * h) + t * load2(c + (k + 1) * P + 2 * h));
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
      s[k++] = scale(b);
    }
    const double* const x = t_work.x.data();
    if (k == B) { // the usual case: every column, a fixed inner loop
      for (std::size_t j = 0; j < m_n; ++j)
        for (std::size_t b = 0; b < B; ++b) out[b][j] = x[j * P + b] * s[b];
      return;
    }
    for (std::size_t j = 0; j < m_n; ++j)
      for (std::size_t c = 0; c < k; ++c) out[c][j] = x[j * P + column[c]] * s[c];
  }

  /// Rayleigh quotients of the vectors, summed as x . (K x): the row sums cancel locally, where
  /// sum K_ij x_i x_j term by term would lose ~1e-9 relative to cancellation on a 2,000-point
  /// mesh.
  void quotients(double* rho) const {
    Pair vkv[H] = {}, vmv[H] = {};
    for_products(t_work.x.data(), [&](std::size_t h, Pair c, Pair kv, Pair mv, Pair, Pair) {
      vkv[h] += c * kv;
      vmv[h] += c * mv;
    });
    for (std::size_t b = 0; b < B; ++b) rho[b] = vkv[b / 2][b % 2] / vmv[b / 2][b % 2];
  }

  /// y = (K - s M)^{-1} M x per column, into the second work array; q[b] its Rayleigh
  /// quotient and ymy[b] = y^T M y. The vectors are not changed until accept(). With
  /// `keep_rows`, the row products of y that the sweep forms anyway (K y, M y, and |K||y|,
  /// |M||y| from the same terms) are kept for residuals().
  /// (The rows are kept only while they fit kept_rows_max_bytes: beyond that, writing and
  /// reading them back costs more memory traffic than the stencil pass they replace.)
  void step(const double* s, double* q, double* ymy, bool keep_rows) {
    m_rows_kept = keep_rows && m_n * row_stride * sizeof(double) <= kept_rows_max_bytes;
    if (m_rows_kept) step_impl<true>(s, q, ymy);
    else step_impl<false>(s, q, ymy);
  }

  /// The vectors become those of the last step, vector b scaled by scale[b].
  void accept(const double* scale) {
    std::swap(t_work.x, t_work.y);
    for (std::size_t b = 0; b < P; ++b) m_scale[b / 2][b % 2] = b < B ? scale[b] : 0.0;
  }

  /// ||K x - rho M x|| / (||K x|| + |rho| ||M x||) per column, the norms, and the residual's
  /// round-off level eps || |K||x| + |rho||M||x| || / (same denominator): res[b] is reported as
  /// 0 when below ten times that level (iterating cannot lower it further). x: the vectors
  /// accepted from the last step: a light pass over its kept row products when it kept them,
  /// else the stencil pass over x (the same sums, in the same order, either way).
  void residuals(const double* rho, double* res, RqiStats* stats) const {
    Pair r2[H] = {}, rh[H] = {};
    for (std::size_t b = 0; b < P; ++b) rh[b / 2][b % 2] = b < B ? rho[b] : 0.0;
    RowSums sums;
    if (m_rows_kept) { // r2 from the kept K y and M y; the other sums from the sweep
      sums = m_sums;
      const double* const rows = t_work.rows.data();
      for (std::size_t j = 0; j < m_n; ++j) {
        const double* const r = rows + j * row_stride;
        for (std::size_t h = 0; h < H; ++h) {
          const Pair e = load2(r + 2 * h) - rh[h] * load2(r + P + 2 * h);
          r2[h] += e * e;
        }
      }
    } else { // the stencil pass over the vectors (large meshes)
      for_products(t_work.x.data(), [&](std::size_t h, Pair, Pair kx, Pair mx, Pair ak, Pair am) {
        const Pair e = kx - rh[h] * mx;
        r2[h] += e * e;
        sums.add(h, kx, mx, ak, am);
      });
    }
    for (std::size_t b = 0; b < B; ++b) {
      const std::size_t h = b / 2, i = b % 2;
      const double k2 = sums.k2[h][i], m2 = sums.m2[h][i], arho = std::abs(rho[b]);
      // || |K||x| + |rho||M||x| ||^2 from its three sums (all terms >= 0: no cancellation)
      const double a2 = sums.aa[h][i] + 2 * arho * sums.am[h][i] + arho * arho * sums.mm[h][i];
      const double denom = std::sqrt(k2) + arho * std::sqrt(m2);
      const double floor = denom > 0 ? eps * std::sqrt(a2) / denom : 0.0;
      res[b] = denom > 0 ? std::sqrt(r2[h][i]) / denom : 0.0;
      if (res[b] <= 10 * floor) res[b] = 0.0;
      const double s = scale(b); // the norms of the scaled vector
      stats[b].r_norm = std::sqrt(r2[h][i]) * s;
      stats[b].kx_norm = std::sqrt(k2) * s;
      stats[b].mx_norm = std::sqrt(m2) * s;
      stats[b].a_norm = std::sqrt(a2) * s;
    }
  }

private:
  /// Sums over the rows of a vector's row products K x, M x and of |K||x|, |M||x| (ak, am):
  /// ||K x||^2, ||M x||^2, and sum ak^2, sum ak am, sum am^2, from which
  /// || |K||x| + |rho||M||x| ||^2 follows for any rho.
  struct RowSums {
    Pair k2[H] = {}, m2[H] = {}, aa[H] = {}, am[H] = {}, mm[H] = {};
    void add(std::size_t h, Pair kx, Pair mx, Pair ak, Pair amx) {
      k2[h] += kx * kx;
      m2[h] += mx * mx;
      aa[h] += ak * ak;
      am[h] += ak * amx;
      mm[h] += amx * amx;
    }
  };
  static constexpr std::size_t row_stride = 2 * P; ///< doubles per row of t_work.rows
  /// Largest kept row products (bench_bench_solve: kept rows are faster at 20,000 points,
  /// 3.8 MB for 5 or 6 vectors; slower at 200,000, 38 MB).
  static constexpr std::size_t kept_rows_max_bytes = std::size_t{8} << 20;

  template <bool Keep> void step_impl(const double* s, double* q, double* ymy) {
    const std::size_t n = m_n;
    if (Keep && t_work.rows.size() < n * row_stride) t_work.rows.resize(n * row_stride);
    double* const rows = t_work.rows.data();
    const double* const x = t_work.x.data();
    double* const y = t_work.y.data();
    double* const dv = t_work.dinv.data();
    const double* const kd = m_p.k_diag.data();
    const double* const md = m_p.m_diag.data();
    const double* const ko = m_p.k_off.data();
    const double* const mo = m_p.m_off.data();
    Pair shift[H] = {}, floor[H] = {}, l_prev[H], y_prev[H];
    for (std::size_t h = 0; h < H; ++h) {
      for (std::size_t i = 0; i < 2; ++i) {
        const std::size_t b = 2 * h + i;
        shift[h][i] = b < B ? s[b] : 0.0;
        floor[h][i] = (m_kmax + std::abs(shift[h][i]) * m_mmax) * eps * eps;
      }
      l_prev[h] = y_prev[h] = Pair{0.0, 0.0};
    }
    // (1) factor + forward substitution (the end rows apart: no tests in the inner loop).
    static constexpr double zeros[P] = {};
    auto forward = [&](std::size_t j, double kdj, double mdj, double ko_prev, double mo_prev,
                       double koj, double moj, const double* xl, const double* xr) {
      const double* xc = x + j * P;
      for (std::size_t h = 0; h < H; ++h) {
        const Pair mx =
            (mdj * load2(xc + 2 * h) + mo_prev * load2(xl + 2 * h) + moj * load2(xr + 2 * h)) * m_scale[h];
        Pair d = kdj - shift[h] * mdj - l_prev[h] * (ko_prev - shift[h] * mo_prev);
        const PairMask tiny = abs2(d) < floor[h]; // singular: stay finite (rare: off the chain)
        if (__builtin_expect((tiny[0] | tiny[1]) != 0, 0))
          d = tiny ? (d < 0.0 ? -floor[h] : floor[h]) : d;
        const Pair dinv = 1.0 / d;
        y_prev[h] = mx - l_prev[h] * y_prev[h];
        l_prev[h] = (koj - shift[h] * moj) * dinv;
        store2(y + j * P + 2 * h, y_prev[h]);
        store2(dv + j * P + 2 * h, dinv);
      }
    };
    {
      const auto [kd0, md0, ko_prev, mo_prev, ko0, mo0] = row(0);
      forward(0, kd0, md0, ko_prev, mo_prev, ko0, mo0, zeros, n > 1 ? x + P : zeros);
    }
    for (std::size_t j = 1; j + 1 < n; ++j)
      forward(j, kd[j], md[j], ko[j - 1], mo[j - 1], ko[j], mo[j], x + (j - 1) * P, x + (j + 1) * P);
    if (n > 1) {
      const auto [kdl, mdl, ko_prev, mo_prev, kol, mol] = row(n - 1);
      forward(n - 1, kdl, mdl, ko_prev, mo_prev, kol, mol, x + (n - 2) * P, zeros);
    }
    // (2) scaling + backward substitution (l_j recomputed from 1/d_j rather than stored),
    // with the quotient of y: once y_j is known, row j + 1 of K y and M y is complete.
    Pair y1[H], y2[H], ykv[H], ymv[H]; // y_{j+1}, y_{j+2}, running sums
    for (std::size_t h = 0; h < H; ++h) {
      const std::size_t i = (n - 1) * P + 2 * h;
      y1[h] = load2(y + i) * load2(dv + i);
      store2(y + i, y1[h]);
      y2[h] = ykv[h] = ymv[h] = Pair{0.0, 0.0};
    }
    // Row products (centre, left, right terms, summed in that order) kept for residuals(),
    // and their sums (RowSums).
    RowSums sums;
    auto keep = [&](std::size_t row, std::size_t h, Pair k1, Pair k0, Pair k2, Pair kv, Pair m1,
                    Pair m0, Pair m2, Pair mv) {
      double* const r = rows + row * row_stride + 2 * h;
      store2(r, kv);
      store2(r + P, mv);
      sums.add(h, kv, mv, abs2(k1) + abs2(k0) + abs2(k2), abs2(m1) + abs2(m0) + abs2(m2));
    };
    // Row j of the sweep; kd1, md1: diagonal of row j + 1; ko1, mo1: its upper neighbour.
    auto backward = [&](std::size_t j, double koj, double moj, double kd1, double md1, double ko1,
                        double mo1) {
      for (std::size_t h = 0; h < H; ++h) {
        const std::size_t i = j * P + 2 * h;
        const Pair dvj = load2(dv + i);
        const Pair l = (koj - shift[h] * moj) * dvj;
        const Pair y0 = load2(y + i) * dvj - l * y1[h];
        store2(y + i, y0);
        const Pair k1 = kd1 * y1[h], k0 = koj * y0, k2 = ko1 * y2[h];
        const Pair m1 = md1 * y1[h], m0 = moj * y0, m2 = mo1 * y2[h];
        const Pair kv = k1 + k0 + k2, mv = m1 + m0 + m2;
        if (Keep) keep(j + 1, h, k1, k0, k2, kv, m1, m0, m2, mv);
        ykv[h] += y1[h] * kv;
        ymv[h] += y1[h] * mv;
        y2[h] = y1[h];
        y1[h] = y0;
      }
    };
    if (n > 1) backward(n - 2, ko[n - 2], mo[n - 2], kd[n - 1], md[n - 1], 0.0, 0.0);
    for (std::size_t j = n - 2; j-- > 0;) backward(j, ko[j], mo[j], kd[j + 1], md[j + 1], ko[j + 1], mo[j + 1]);
    const double ko0 = n > 1 ? ko[0] : 0.0, mo0 = n > 1 ? mo[0] : 0.0;
    for (std::size_t h = 0; h < H; ++h) { // row 0 (no left neighbour: a zero term)
      const Pair k1 = kd[0] * y1[h], k2 = ko0 * y2[h], m1 = md[0] * y1[h], m2 = mo0 * y2[h];
      const Pair kv = k1 + k2, mv = m1 + m2;
      if (Keep) keep(0, h, k1, Pair{0.0, 0.0}, k2, kv, m1, Pair{0.0, 0.0}, m2, mv);
      ykv[h] += y1[h] * kv;
      ymv[h] += y1[h] * mv;
    }
    for (std::size_t b = 0; b < B; ++b) {
      q[b] = ykv[b / 2][b % 2] / ymv[b / 2][b % 2];
      ymy[b] = ymv[b / 2][b % 2];
    }
    if (Keep) m_sums = sums;
  }

  double scale(std::size_t b) const { return m_scale[b / 2][b % 2]; }

  /// Row j of the pencil: K_jj, M_jj, K_j,j-1, M_j,j-1, K_j,j+1, M_j,j+1 (0 beyond the ends).
  struct Row {
    double kd, md, ko_prev, mo_prev, ko, mo;
  };
  Row row(std::size_t j) const {
    const bool first = j == 0, last = j + 1 == m_n;
    return {m_p.k_diag[j], m_p.m_diag[j], first ? 0.0 : m_p.k_off[j - 1],
            first ? 0.0 : m_p.m_off[j - 1], last ? 0.0 : m_p.k_off[j], last ? 0.0 : m_p.m_off[j]};
  }

  /// Calls f(h, v, K v, M v, |K||v|, |M||v|) for every row j and pair h of columns of the
  /// interleaved v (the end rows apart, so that the inner loop has no tests).
  template <class F> void for_products(const double* v, F&& f) const {
    const std::size_t n = m_n;
    static constexpr double zeros[P] = {};
    auto one_row = [&](std::size_t j, double kdj, double mdj, double ko_prev, double mo_prev,
                       double koj, double moj, const double* l, const double* r) {
      const double* c = v + j * P;
      for (std::size_t h = 0; h < H; ++h) {
        const Pair cv = load2(c + 2 * h), lv = load2(l + 2 * h), rv = load2(r + 2 * h);
        f(h, cv, kdj * cv + ko_prev * lv + koj * rv, mdj * cv + mo_prev * lv + moj * rv,
          abs2(kdj * cv) + abs2(ko_prev * lv) + abs2(koj * rv),
          abs2(mdj * cv) + abs2(mo_prev * lv) + abs2(moj * rv));
      }
    };
    {
      const auto [kd0, md0, ko_prev, mo_prev, ko0, mo0] = row(0);
      one_row(0, kd0, md0, ko_prev, mo_prev, ko0, mo0, zeros, n > 1 ? v + P : zeros);
    }
    const double* const kd = m_p.k_diag.data();
    const double* const md = m_p.m_diag.data();
    const double* const ko = m_p.k_off.data();
    const double* const mo = m_p.m_off.data();
    for (std::size_t j = 1; j + 1 < n; ++j)
      one_row(j, kd[j], md[j], ko[j - 1], mo[j - 1], ko[j], mo[j], v + (j - 1) * P, v + (j + 1) * P);
    if (n > 1) {
      const auto [kdl, mdl, ko_prev, mo_prev, kol, mol] = row(n - 1);
      one_row(n - 1, kdl, mdl, ko_prev, mo_prev, kol, mol, v + (n - 2) * P, zeros);
    }
  }

  const TridiagonalPencil& m_p;
  std::size_t m_n;
  double m_kmax, m_mmax;
  Pair m_scale[H];
  bool m_rows_kept = false; ///< the last step kept its row products (residuals() reads them)
  RowSums m_sums;           ///< their sums, when kept
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
      // Converged once the residual is small enough (it counts as 0 at its round-off level),
      // or, when no residual is measured, once the quotient stops moving. (The quotient's
      // error is the square of the residual's: it stops moving at a residual near 1e-7, which
      // one more step takes to round-off.)
      if (residual_tol > 0) {
        if (res[b] <= residual_tol) active[b] = false;
      } else if (it >= min_steps &&
                 std::abs(rho[b] - previous[b]) <= 1e-14 * std::abs(rho[b]) + 4 * eps * scale) {
        active[b] = false;
      }
      previous[b] = rho[b];
      if (active[b]) any = true;
      else done[b] = true;
    }
    block.store(done, xs); // the vectors that have converged
    if (!any) return;
    double shift[B], q[B], ymy[B], next_scale[B];
    for (std::size_t b = 0; b < B; ++b) {
      shift[b] = it == 0 && !std::isnan(first_shift[b]) ? first_shift[b] : rho[b];
      if (!std::isfinite(shift[b])) shift[b] = 0.0;
    }
    block.step(shift, q, ymy, residual_tol > 0);
    bool failed[B] = {};
    for (std::size_t b = 0; b < B; ++b) {
      next_scale[b] = 0.0; // columns no longer followed: anything finite
      if (!active[b]) continue;
      if (!(ymy[b] > 0 && std::isfinite(ymy[b]) && std::isfinite(q[b]))) {
        failed[b] = true; // zero or non-finite: keep the last good vector
        active[b] = false;
        continue;
      }
      next_scale[b] = 1.0 / std::sqrt(ymy[b]); // x^T M x = 1
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
                                 const std::vector<std::size_t>& kept_base) {
  // The kept base nodes' positions in fn (increasing, as both lists are).
  std::vector<std::size_t> kept;
  auto from = fn.begin();
  for (const std::size_t k : kept_base) {
    from = std::lower_bound(from, fn.end(), k);
    if (from == fn.end()) break;
    if (*from == k) kept.push_back(static_cast<std::size_t>(from - fn.begin()));
  }
  const std::vector<std::size_t> pos = every_other_node_keeping(fn.size() - 1, kept); // in fn
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
  // Computed per interval of the coarse mesh (each weight divided out once), in the order
  // of the formula: A(f, f), then the midpoint before, then the midpoint after.
  TridiagonalPencil& pc = c.pencil;
  pc.k_diag.resize(nc);
  pc.m_diag.resize(nc);
  pc.k_off.resize(nc - 1);
  pc.m_off.resize(nc - 1);
  pc.node.assign(c.nodes.begin() + static_cast<std::ptrdiff_t>(first), c.nodes.end());
  const std::size_t last = pos.size() - 1;
  const double* const kd = pf.k_diag.data();
  const double* const md = pf.m_diag.data();
  const double* const ko = pf.k_off.data();
  const double* const mo = pf.m_off.data();
  double* const ckd = pc.k_diag.data();
  double* const cmd = pc.m_diag.data();
  double* const cko = pc.k_off.data();
  double* const cmo = pc.m_off.data();
  for (std::size_t J = first; J <= last; ++J) {
    ckd[J - first] = kd[pos[J] - first];
    cmd[J - first] = md[pos[J] - first];
  }
  for (std::size_t J = 0; J < last; ++J) {
    const std::size_t f = pos[J], g = pos[J + 1];
    const bool unknown = J >= first; // (the removed first node takes no row)
    if (g == f + 2) { // midpoint m: the weight of J there is wf, that of J + 1 is wg
      const std::size_t m = f + 1;
      const double xf = x[fn[f]], xm = x[fn[m]], xg = x[fn[g]];
      const double wg = (xm - xf) / (xg - xf), wf = (xg - xm) / (xg - xf);
      const double kdm = kd[m - first], mdm = md[m - first], kom = ko[m - first], mom = mo[m - first];
      if (unknown) {
        const double kof = ko[f - first], mof = mo[f - first], t = 1.0 - wf;
        ckd[J - first] += 2 * wf * kof + wf * wf * kdm;
        cmd[J - first] += 2 * wf * mof + wf * wf * mdm;
        cko[J - first] = t * kof + t * wf * kdm + wf * kom;
        cmo[J - first] = t * mof + t * wf * mdm + wf * mom;
      }
      ckd[J + 1 - first] += 2 * wg * kom + wg * wg * kdm;
      cmd[J + 1 - first] += 2 * wg * mom + wg * wg * mdm;
    } else if (unknown) { // neighbours
      cko[J - first] = ko[f - first];
      cmo[J - first] = mo[f - first];
    }
  }
  return c;
}

} // namespace radmode::detail
