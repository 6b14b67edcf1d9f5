#include "radmode/structure.hpp"

#include "exp_function.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <sstream>
#include <string>

namespace radmode {

namespace {

void prepend(std::vector<double>& v, double x) {
  if (!v.empty()) v.insert(v.begin(), x);
}

/// Fritsch–Carlson: the cubic with end values f0, f1 and end derivatives (per unit t) g0, g1
/// is monotone when both derivatives share the secant's sign and a^2 + b^2 <= 9, with
/// a = g0 / (f1 - f0), b = g1 / (f1 - f0) (tested here without dividing).
bool monotone_cubic(double f0, double f1, double g0, double g1) {
  // (bitwise &: all three tests evaluated, no branches between them)
  const double delta = f1 - f0;
  if (delta == 0.0) return g0 == 0.0 && g1 == 0.0;
  return (g0 * delta >= 0) & (g1 * delta >= 0) & (g0 * g0 + g1 * g1 <= 9.0 * (delta * delta));
}

/// d f/dr at row j from its neighbours inside rows [lo, hi] (three-point, second order,
/// one-sided at the ends; the secant when the segment has two rows).
double fd_slope(const double* r, const double* f, std::size_t j, std::size_t lo,
                std::size_t hi) {
  if (hi - lo == 1) return (f[hi] - f[lo]) / (r[hi] - r[lo]);
  if (j > lo && j < hi) {
    // Centred: the derivative at r_j of the parabola through rows j-1, j, j+1, i.e. the
    // secants weighted by the opposite spacing, (h2 s1 + h1 s2) / (h1 + h2), in one division.
    const double h1 = r[j] - r[j - 1], h2 = r[j + 1] - r[j];
    const double d1 = f[j] - f[j - 1], d2 = f[j + 1] - f[j];
    return (h2 * h2 * d1 + h1 * h1 * d2) / (h1 * h2 * (h1 + h2));
  }
  std::size_t a = lo, b = lo + 1, c = lo + 2;
  if (j == hi) a = hi - 2, b = hi - 1, c = hi;
  // Derivative at r[j] of the parabola through (a, b, c).
  const double x = r[j], xa = r[a], xb = r[b], xc = r[c];
  const double la = ((x - xb) + (x - xc)) / ((xa - xb) * (xa - xc));
  const double lb = ((x - xa) + (x - xc)) / ((xb - xa) * (xb - xc));
  const double lc = ((x - xa) + (x - xb)) / ((xc - xa) * (xc - xb));
  return la * f[a] + lb * f[b] + lc * f[c];
}

/// d ln rho/dr at each of n rows by finite differences (fd_slope) inside each run of rows with
/// rho > 0 and no repeated radius; NaN elsewhere (a zero density, a lone row).
void log_density_slopes(const double* r, const double* rho, const double* lnrho, std::size_t n,
                        double* dlnrho) {
  std::fill(dlnrho, dlnrho + n, std::numeric_limits<double>::quiet_NaN());
  std::size_t lo = 0;
  for (std::size_t j = 1; j <= n; ++j) {
    if (j < n && r[j] != r[j - 1] && rho[j] > 0 && rho[j - 1] > 0) continue;
    const std::size_t hi = j - 1; // run [lo, hi]
    if (hi > lo && rho[lo] > 0)
      for (std::size_t k = lo; k <= hi; ++k) dlnrho[k] = fd_slope(r, lnrho, k, lo, hi);
    lo = j;
  }
}

} // namespace

// Defined before its callers, so that they can inline it (measured: the calls cost about
// 1.5 of the 73 microseconds of a 2,000-row structure).
inline bool Structure::shape_for(Curve& out, double f0, double f1, double g0, double g1, double lf0,
                                 double lf1, double lg0, double lg1, bool pressure) {
  // Candidates: cubic Hermite in log (both ends > 0) and in linear space, each only when its
  // end derivatives are finite and keep it monotone; else the fallback rule (linear in log
  // when both ends are > 0, otherwise linear).
  const bool positive = f0 > 0 && f1 > 0;
  const bool log_ok = positive && std::isfinite(lg0) && std::isfinite(lg1) &&
                      monotone_cubic(lf0, lf1, lg0, lg1);
  if (log_ok) set_curve(out, lf0, lf1, lg0, lg1, Shape::log_hermite);
  if (log_ok && !pressure) return false; // no choice to make: the log cubic wins
  const bool lin_ok = std::isfinite(g0) && std::isfinite(g1) && monotone_cubic(f0, f1, g0, g1);
  if (log_ok) return lin_ok; // both usable: the caller chooses
  if (lin_ok) set_curve(out, f0, f1, g0, g1, Shape::hermite);
  else if (positive) set_curve(out, lf0, lf1, 0, 0, Shape::log_linear);
  else set_curve(out, f0, f1, 0, 0, Shape::linear);
  return false;
}

Structure::Structure(const StellarModel& model, InnerCondition inner)
    : m_table(model), m_inner(inner) {
  validate_model(model);
  StellarModel& t = m_table;
  if (inner == InnerCondition::centre && t.r.front() > 0.0) {
    const double r0 = t.r.front(), rho0 = t.rho.front();
    const double Pc = t.P.front() + (2.0 * constants::pi / 3.0) * constants::G * rho0 * rho0 * r0 * r0;
    prepend(t.r, 0.0);
    prepend(t.m, 0.0);
    prepend(t.P, Pc);
    prepend(t.rho, rho0);
    prepend(t.gamma1, t.gamma1.front());
    prepend(t.nabla_ad, t.nabla_ad.empty() ? 0.0 : t.nabla_ad.front());
    // Other optional columns keep their length equal to r: repeat the innermost value.
    prepend(t.T, t.T.empty() ? 0.0 : t.T.front());
    prepend(t.L, 0.0);
    prepend(t.u, t.u.empty() ? 0.0 : t.u.front());
    for (auto& col : t.extra) prepend(col.second, col.second.empty() ? 0.0 : col.second.front());
    if (!t.line.empty()) t.line.insert(t.line.begin(), std::size_t{0});
    m_extended = true;
  }
  prepare(false);
}

Structure::Structure(StellarModel&& table, InnerCondition inner, std::vector<double>&& rows,
                     Prepared)
    : m_table(std::move(table)), m_row(std::move(rows)), m_inner(inner) {
  prepare(true);
}

inline bool Structure::build_interval(Interval& iv, StructureValues& v, const Columns& c,
                                      std::size_t j, std::size_t j1, std::size_t d0,
                                      std::size_t d1, bool has_before, std::size_t before) {
  const double *r = c.r, *m = c.m, *P = c.P, *rho = c.rho;
  iv.row = j;
  iv.r0 = r[j];
  iv.r1 = r[j1];
  const double h = iv.r1 - iv.r0;
  iv.g0 = c.gamma1[j];
  iv.g1 = c.gamma1[j1];
  iv.na0 = c.nabla_ad ? c.nabla_ad[j] : 0.0;
  iv.na1 = c.nabla_ad ? c.nabla_ad[j1] : 0.0;
  set_curve(iv.m, m[j], m[j1], h * c.dm[j], h * c.dm[j1], Shape::hermite);
  if (!monotone_cubic(iv.m.f0, iv.m.f1, iv.m.g0, iv.m.g1)) iv.m.shape = Shape::linear;
  const double* dlnrho = c.dlnrho;
  shape_for(iv.rho, rho[j], rho[j1], h * rho[j] * dlnrho[d0], h * rho[j1] * dlnrho[d1],
            c.lnrho[j], c.lnrho[j1], h * dlnrho[d0], h * dlnrho[d1], false);
  if (rho[j1] == 0.0 && rho[j] > 0.0 && has_before && r[before] < r[j] &&
      rho[before] > rho[j]) {
    // Density falling to zero: power law in the depth below r_{j+1}.
    const double alpha = std::log(rho[before] / rho[j]) /
                         std::log((r[j1] - r[before]) / (r[j1] - r[j]));
    if (std::isfinite(alpha) && alpha > 0.0 && alpha <= 20.0)
      set_curve(iv.rho, rho[j], 0.0, alpha, 0.0, Shape::power_to_zero);
  }
  const bool choose = shape_for(iv.P, P[j], P[j1], h * c.dP[j], h * c.dP[j1], c.lnP[j],
                                c.lnP[j1], h * c.dlnP[j], h * c.dlnP[j1], true);
  if (choose) {
    const Basis mid = basis(0.5); // constant-folded
    log_argument(iv.P, 0.5, mid, v.P);
    if (!log_argument(iv.rho, 0.5, mid, v.rho)) v.rho = value(iv.rho, 0.5, mid);
  }
  return choose;
}

void Structure::midpoint_exponentials(const Interval* iv, StructureValues* mid_values,
                                      const unsigned char* known, std::size_t count) {
  const Basis mid = basis(0.5); // constant-folded
  const detail::ExpFunction exp = detail::exp_function(); // std::exp's results
  double unused = 0;
  for (std::size_t i = 0; i < count; ++i)
    if (known[i]) {
      mid_values[i].P = exp(mid_values[i].P);
      if (log_argument(iv[i].rho, 0.5, mid, unused)) mid_values[i].rho = exp(mid_values[i].rho);
    }
}

inline void Structure::choose_pressure(Interval& iv, StructureValues& v, double P0, double P1,
                                       double dP0, double dP1) {
  const Basis mid = basis(0.5); // constant-folded
  const double h = iv.r1 - iv.r0;
  const Curve lin{P0, P1, h * dP0, h * dP1, Shape::hermite};
  const Curve& lg = iv.P;
  v.m = value(iv.m, 0.5, mid);
  v.gamma1 = (1.0 - 0.5) * iv.g0 + 0.5 * iv.g1;
  const double rm = 0.5 * (iv.r0 + iv.r1);
  const double target = rm > 0 ? -constants::G * v.m * v.rho * h / (rm * rm) : 0.0;
  const auto v_lin = eval(lin, 0.5, mid);
  const double dP_log =
      v.P * (mid.d00 * lg.f0 + mid.d10 * lg.g0 + mid.d01 * lg.f1 + mid.d11 * lg.g1);
  if (!(std::abs(dP_log - target) <= std::abs(v_lin.second - target))) {
    v.P = v_lin.first;
    iv.P = lin;
  }
}

// The preparation and the log-value evaluations with every call inside inlined (GCC, Clang): left to the
// compiler, build_interval or the shape_for and log_argument calls in it stayed calls, which
// slowed the preparation of 2,000 rows from 73 to 82-85 us.
#if defined(__GNUC__)
#define RADMODE_FLATTEN __attribute__((flatten))
#else
#define RADMODE_FLATTEN
#endif

RADMODE_FLATTEN void Structure::prepare(bool rows_known) {
  const StellarModel& t = m_table;
  m_has_nabla_ad = !t.nabla_ad.empty();
  m_mass = t.m.back();
  m_surface_P = t.P.back();

  const std::size_t n = t.r.size();
  const double *r = t.r.data(), *m = t.m.data(), *P = t.P.data(), *rho = t.rho.data();
  const double* gamma1 = t.gamma1.data();
  using constants::G;
  using constants::pi;
  // Per row, computed once (each row serves two intervals): derivatives from the model's own
  // equations, dm/dr = 4 pi r^2 rho and hydrostatic equilibrium dP/dr = -G m rho / r^2 (0 at
  // r = 0); ln rho and ln P where positive (0 elsewhere, unused there); d ln rho / dr by finite
  // differences inside each segment between discontinuities (NaN where rho has a zero).
  // Kept (m_row): every_other_row takes over the values of its rows but the differences.
  m_row.resize(row_columns * n);
  double* dm = m_row.data() + dm_col * n;
  double* dP = m_row.data() + dP_col * n;
  double* lnrho = m_row.data() + lnrho_col * n;
  double* lnP = m_row.data() + lnP_col * n;
  double* dlnP = m_row.data() + dlnP_col * n; // d ln P / dr where P > 0
  double* dlnrho = m_row.data() + dlnrho_col * n;
  if (!rows_known)
    for (std::size_t j = 0; j < n; ++j) {
      dm[j] = 4 * pi * r[j] * r[j] * rho[j];
      dP[j] = r[j] > 0 ? -G * m[j] * rho[j] / (r[j] * r[j]) : 0.0;
      lnrho[j] = rho[j] > 0 ? std::log(rho[j]) : 0.0;
      lnP[j] = P[j] > 0 ? std::log(P[j]) : 0.0;
      dlnP[j] = P[j] > 0 ? dP[j] / P[j] : 0.0;
    }
  log_density_slopes(r, rho, lnrho, n, dlnrho);

  // Records are written in place (assembling one in a local and copying it into the vector
  // made the copy wait for the local's stores), and not zeroed first (Interval's constructor
  // leaves it uninitialized; every member is set below).
  m_iv.clear();
  m_mid.clear();
  m_mid_known.clear();
  m_node_r.clear();
  m_discontinuity.clear();
  m_discontinuity_nodes.clear();
  m_iv.reserve(n - 1);
  m_mid.reserve(n - 1);
  m_mid_known.reserve(n - 1);
  m_node_r.reserve(n);
  m_node_r.push_back(r[0]);
  // Where both pressure cubics are usable the shape is chosen at the midpoint: the log cubic
  // is put in place first, and the logs of P and rho there kept in m_mid; their exponentials
  // are evaluated afterwards in one loop, then the choice is made.
  const Columns c{r,  m,  P,     rho, gamma1, m_has_nabla_ad ? t.nabla_ad.data() : nullptr,
                  dm, dP, lnrho, lnP, dlnP,   dlnrho};
  for (std::size_t j = 0; j + 1 < n; ++j) {
    if (r[j + 1] == r[j]) { // repeated radius: no interval, the node is a discontinuity
      const std::size_t node = m_node_r.size() - 1;
      if (m_discontinuity_nodes.empty() || m_discontinuity_nodes.back() != node)
        m_discontinuity_nodes.push_back(node);
      continue;
    }
    const bool choose = build_interval(m_iv.emplace_back(), m_mid.emplace_back(), c, j, j + 1, j,
                                       j + 1, j > 0, j - 1);
    m_mid_known.push_back(choose ? 1 : 0);
    m_node_r.push_back(r[j + 1]);
  }
  // The flags from the list (a bit vector grown row by row costs more).
  m_discontinuity.assign(m_node_r.size(), false);
  for (const std::size_t node : m_discontinuity_nodes) m_discontinuity[node] = true;
  const std::size_t count = m_iv.size();
  midpoint_exponentials(m_iv.data(), m_mid.data(), m_mid_known.data(), count);
  // The choice: the cubic closer to hydrostatic equilibrium at the midpoint, compared per
  // unit t (both sides times the interval length: no division); the values computed there are
  // kept for values_at(interval, 1/2), bit for bit what value() and eval() give.
  for (std::size_t i = 0; i < count; ++i) {
    if (!m_mid_known[i]) continue;
    const std::size_t j = m_iv[i].row;
    choose_pressure(m_iv[i], m_mid[i], P[j], P[j + 1], dP[j], dP[j + 1]);
  }
  m_common.resize(count);
  for (std::size_t i = 0; i < count; ++i) {
    const Interval& iv = m_iv[i];
    m_common[i] = m_mid_known[i] && iv.m.shape == Shape::hermite &&
                  iv.P.shape == Shape::log_hermite && iv.rho.shape == Shape::log_hermite;
  }
}

void Structure::values_at_rule(std::size_t first, std::size_t last, const double* t,
                               std::size_t q, StructureValues* out) const {
  if (q > max_rule_points || last > m_iv.size() || first > last)
    throw UsageError("Structure::values_at_rule: expected at most " +
                     std::to_string(max_rule_points) + " points and intervals inside 0.." +
                     std::to_string(m_iv.size()));
  // The number of points as a compile-time constant, so that the loops over them unroll.
  switch (q) {
  case 0: return;
  case 1: return values_at_rule_fixed<1>(first, last, t, out);
  case 2: return values_at_rule_fixed<2>(first, last, t, out);
  case 3: return values_at_rule_fixed<3>(first, last, t, out);
  case 4: return values_at_rule_fixed<4>(first, last, t, out);
  case 5: return values_at_rule_fixed<5>(first, last, t, out);
  case 6: return values_at_rule_fixed<6>(first, last, t, out);
  case 7: return values_at_rule_fixed<7>(first, last, t, out);
  default: return values_at_rule_fixed<8>(first, last, t, out);
  }
}

template <std::size_t Q>
void Structure::values_at_rule_fixed(std::size_t first, std::size_t last, const double* t,
                                     StructureValues* out) const {
  static_assert(Q <= max_rule_points, "at most max_rule_points points");
  std::array<Basis, Q> b{};
  for (std::size_t l = 0; l < Q; ++l) b[l] = basis(t[l]);
  // Points taken from values_at as they are: table rows (t = 0, 1), and the midpoint where
  // the preparation kept its values.
  std::array<bool, Q> row{}, half{};
  for (std::size_t l = 0; l < Q; ++l) {
    row[l] = t[l] == 0.0 || t[l] == 1.0;
    half[l] = t[l] == 0.5;
  }
  // Blocks of intervals: the values without exponential first, each curve's shape looked at
  // once per interval, the arguments of the exponentials collected; then those exponentials
  // in one loop of independent calls.
  constexpr std::size_t block = 64;
  const detail::ExpFunction exp = detail::exp_function(); // std::exp's results
  std::array<double, 2 * Q * block> arg;
  std::array<double*, 2 * Q * block> dest;
  std::array<bool, Q> direct{};
  for (std::size_t i0 = first; i0 < last; i0 += block) {
    const std::size_t i1 = std::min(last, i0 + block);
    std::size_t ne = 0;
    for (std::size_t i = i0; i < i1; ++i) {
      const Interval& iv = m_iv[i];
      StructureValues* o = out + (i - first) * Q;
      if (m_common[i]) { // the common shapes, without looking at them (value()'s arithmetic)
        for (std::size_t l = 0; l < Q; ++l) {
          if (row[l]) {
            o[l] = values_at(i, t[l]);
          } else if (half[l]) {
            o[l] = m_mid[i];
          } else {
            o[l].m = hermite(iv.m, b[l]);
            o[l].gamma1 = (1.0 - t[l]) * iv.g0 + t[l] * iv.g1;
            arg[ne] = hermite(iv.P, b[l]);
            dest[ne++] = &o[l].P;
            arg[ne] = hermite(iv.rho, b[l]);
            dest[ne++] = &o[l].rho;
          }
        }
        continue;
      }
      const bool mid_known = m_mid_known[i] != 0;
      for (std::size_t l = 0; l < Q; ++l) {
        direct[l] = row[l] || (half[l] && mid_known);
        if (direct[l]) {
          o[l] = values_at(i, t[l]);
        } else {
          o[l].m = value(iv.m, t[l], b[l]);
          o[l].gamma1 = (1.0 - t[l]) * iv.g0 + t[l] * iv.g1;
        }
      }
      auto curve = [&](const Curve& c, double StructureValues::*field) {
        for (std::size_t l = 0; l < Q; ++l)
          if (!direct[l]) {
            if (log_argument(c, t[l], b[l], arg[ne])) dest[ne++] = &(o[l].*field);
            else o[l].*field = value(c, t[l], b[l]);
          }
      };
      curve(iv.P, &StructureValues::P);
      curve(iv.rho, &StructureValues::rho);
    }
    for (std::size_t a = 0; a < ne; ++a) arg[a] = exp(arg[a]);
    for (std::size_t a = 0; a < ne; ++a) *dest[a] = arg[a];
  }
}

RADMODE_FLATTEN void Structure::log_values_at(const std::size_t* interval, const double* t,
                                              std::size_t count, StructureValues* out,
                                              unsigned char* logs,
                                              StructureValues* values) const {
  // One pass in blocks: the logs, and with `values` the values too (the table rows and the
  // kept midpoints as they are, the exponentials of the logs in one loop per block).
  const Basis mid = basis(0.5); // constant-folded
  const detail::ExpFunction exp = detail::exp_function(); // std::exp's results
  constexpr std::size_t block = 128;
  std::array<double, 2 * block> arg;
  std::array<double*, 2 * block> dest;
  for (std::size_t k0 = 0; k0 < count; k0 += block) {
    const std::size_t k1 = std::min(count, k0 + block);
    std::size_t ne = 0;
    for (std::size_t k = k0; k < k1; ++k) {
      const std::size_t i = interval[k];
      const double tk = t[k];
      const Interval& iv = m_iv[i];
      if (tk == 0.5 && m_mid_known[i]) { // the kept midpoint values; logs where log curves
        out[k] = m_mid[i];
        if (values) values[k] = m_mid[i];
        unsigned flags = 0;
        if (log_argument(iv.P, 0.5, mid, out[k].P)) flags |= log_P;
        if (log_argument(iv.rho, 0.5, mid, out[k].rho)) flags |= log_rho;
        logs[k] = static_cast<unsigned char>(flags);
        continue;
      }
      if (m_common[i] && tk == 0.0) { // the left row; the log curves' end values
        const std::size_t row = iv.row;
        out[k] = {m_table.m[row], iv.P.f0, iv.rho.f0, m_table.gamma1[row]};
        if (values) values[k] = {m_table.m[row], m_table.P[row], m_table.rho[row], m_table.gamma1[row]};
        logs[k] = log_P | log_rho;
        continue;
      }
      if (m_common[i] && tk > 0.0 && tk < 1.0) logs[k] = common_log_values(iv, tk, out[k]);
      else logs[k] = static_cast<unsigned char>(log_values(i, tk, out[k]));
      if (!values) continue;
      if (tk == 0.0 || tk == 1.0) {
        values[k] = values_at(i, tk);
        continue;
      }
      values[k] = out[k];
      if (logs[k] & log_P) arg[ne] = out[k].P, dest[ne++] = &values[k].P;
      if (logs[k] & log_rho) arg[ne] = out[k].rho, dest[ne++] = &values[k].rho;
    }
    for (std::size_t e = 0; e < ne; ++e) arg[e] = exp(arg[e]);
    for (std::size_t e = 0; e < ne; ++e) *dest[e] = arg[e];
  }
}

RADMODE_FLATTEN unsigned Structure::log_values(std::size_t interval, double t, StructureValues& out) const {
  // The arithmetic of value() (so that exp of a log here is value()'s result bit for bit).
  const Interval& iv = m_iv[interval];
  unsigned logs = 0;
  if (t == 0.0 || t == 1.0) { // the table row; logs are the log curves' end values
    out = values_at(interval, t);
    // A log curve's end values are the logs of its rows.
    double unused = 0;
    const Basis b = basis(t);
    if (log_argument(iv.P, t, b, unused)) out.P = t == 0.0 ? iv.P.f0 : iv.P.f1, logs |= log_P;
    if (log_argument(iv.rho, t, b, unused))
      out.rho = t == 0.0 ? iv.rho.f0 : iv.rho.f1, logs |= log_rho;
    return logs;
  }
  return log_values_inside(iv, t, out);
}

unsigned Structure::log_values_inside(const Interval& iv, double t, StructureValues& out) {
  unsigned logs = 0;
  const Basis b = basis(t);
  out.m = value(iv.m, t, b);
  out.gamma1 = (1.0 - t) * iv.g0 + t * iv.g1;
  auto put = [&](const Curve& c, double& to, unsigned flag) {
    if (log_argument(c, t, b, to)) logs |= flag;
    else to = value(c, t, b);
  };
  put(iv.P, out.P, log_P);
  put(iv.rho, out.rho, log_rho);
  return logs;
}

RADMODE_FLATTEN Structure::RowSubset::RowSubset(const Structure& full, const std::vector<std::size_t>& kept) {
  const std::size_t intervals = full.m_iv.size();
  bool ok = kept.size() >= 2 && kept.front() == 0 && kept.back() == intervals;
  for (std::size_t k = 1; ok && k < kept.size(); ++k) ok = kept[k] > kept[k - 1];
  if (!ok)
    throw UsageError("Structure::RowSubset: expected increasing base nodes from 0 to " +
                     std::to_string(intervals));
  const std::size_t count = kept.size() - 1;
  // Every row beyond the first at a node sits at a discontinuity, and those are all kept.
  m_table_rows = kept.size() + (full.m_table.size() - full.m_node_r.size());
  // Table rows of each interval: the left row of its first model interval, the right row of
  // its last. The subset's rows in order (every_other_row's table without the middle rows of
  // a radius repeated three times, which no interval uses and which end runs of rows on both
  // sides anyway): a_0, b_0, [a_1 where it differs from b_0: a discontinuity], b_1, ...
  std::vector<std::size_t> a(count), b(count), pos_a(count), pos_b(count), seq;
  seq.reserve(count + 1 + full.m_discontinuity_nodes.size());
  for (std::size_t k = 0; k < count; ++k) {
    a[k] = full.m_iv[kept[k]].row;
    b[k] = full.m_iv[kept[k + 1] - 1].row + 1;
    if (k == 0 || a[k] != b[k - 1]) seq.push_back(a[k]);
    pos_a[k] = seq.size() - 1;
    pos_b[k] = seq.size();
    seq.push_back(b[k]);
  }
  // d ln rho/dr of the subset (finite differences over its own rows).
  const std::size_t n = full.m_table.size(), ns = seq.size();
  const StellarModel& t = full.m_table;
  const double* lnrho = full.m_row.data() + lnrho_col * n;
  std::vector<double> work(4 * ns);
  double *sr = work.data(), *srho = sr + ns, *slnrho = srho + ns, *sdlnrho = slnrho + ns;
  for (std::size_t q = 0; q < ns; ++q) {
    sr[q] = t.r[seq[q]];
    srho[q] = t.rho[seq[q]];
    slnrho[q] = lnrho[seq[q]];
  }
  log_density_slopes(sr, srho, slnrho, ns, sdlnrho);
  const double* rows = full.m_row.data();
  const Columns c{t.r.data(),       t.m.data(),         t.P.data(),
                  t.rho.data(),     t.gamma1.data(),    full.m_has_nabla_ad ? t.nabla_ad.data() : nullptr,
                  rows + dm_col * n, rows + dP_col * n,  lnrho,
                  rows + lnP_col * n, rows + dlnP_col * n, sdlnrho};
  // As prepare(): the intervals, the midpoint exponentials in one loop, the pressure choice.
  m_iv.resize(count);
  std::vector<StructureValues> mid(count);
  std::vector<unsigned char> known(count);
  for (std::size_t k = 0; k < count; ++k) {
    // The row before a_k in the subset: a_{k-1} where a_k = b_{k-1}, else b_{k-1} (same radius).
    const std::size_t before = k == 0 ? 0 : a[k] == b[k - 1] ? a[k - 1] : b[k - 1];
    known[k] = build_interval(m_iv[k], mid[k], c, a[k], b[k], pos_a[k], pos_b[k], k > 0, before)
                   ? 1 : 0;
  }
  midpoint_exponentials(m_iv.data(), mid.data(), known.data(), count);
  const double* dP = c.dP;
  for (std::size_t k = 0; k < count; ++k)
    if (known[k]) choose_pressure(m_iv[k], mid[k], t.P[a[k]], t.P[b[k]], dP[a[k]], dP[b[k]]);
}

RADMODE_FLATTEN void Structure::RowSubset::log_values_at(const std::size_t* interval, const double* t,
                                         std::size_t count, StructureValues* out,
                                         unsigned char* logs) const {
  for (std::size_t k = 0; k < count; ++k) {
    const Interval& iv = m_iv[interval[k]];
    const double tk = t[k];
    if (tk > 0.0 && tk < 1.0) {
      if (iv.m.shape == Shape::hermite && iv.P.shape == Shape::log_hermite &&
          iv.rho.shape == Shape::log_hermite) {
        logs[k] = common_log_values(iv, tk, out[k]);
      } else {
        logs[k] = static_cast<unsigned char>(log_values_inside(iv, tk, out[k]));
      }
      continue;
    }
    // An end: the curves' end values (the log for a log-space curve).
    const bool left = tk == 0.0;
    const Basis unused_b = basis(tk);
    double unused = 0;
    out[k] = {left ? iv.m.f0 : iv.m.f1, left ? iv.P.f0 : iv.P.f1, left ? iv.rho.f0 : iv.rho.f1,
              left ? iv.g0 : iv.g1};
    unsigned flags = 0;
    if (log_argument(iv.P, tk, unused_b, unused)) flags |= log_P;
    if (log_argument(iv.rho, tk, unused_b, unused)) flags |= log_rho;
    logs[k] = static_cast<unsigned char>(flags);
  }
}

inline std::pair<double, double> Structure::eval(const Curve& c, double t, const Basis& b) {
  switch (c.shape) {
  case Shape::linear:
    return {c.f0 + t * (c.f1 - c.f0), c.f1 - c.f0};
  case Shape::log_linear: {
    const double v = std::exp(c.f0 + t * (c.f1 - c.f0));
    return {v, v * (c.f1 - c.f0)};
  }
  case Shape::power_to_zero: { // f0 (1 - t)^alpha, alpha in g0
    const double v = c.f0 * std::pow(1.0 - t, c.g0);
    return {v, t < 1.0 ? -c.g0 * v / (1.0 - t) : 0.0};
  }
  case Shape::hermite:
    return {hermite(c, b), b.d00 * c.f0 + b.d10 * c.g0 + b.d01 * c.f1 + b.d11 * c.g1};
  case Shape::log_hermite:
  default: {
    const double v = std::exp(hermite(c, b));
    return {v, v * (b.d00 * c.f0 + b.d10 * c.g0 + b.d01 * c.f1 + b.d11 * c.g1)};
  }
  }
}

StructurePoint Structure::at(std::size_t interval, double t) const {
  const Interval& iv = m_iv[interval];
  const StellarModel& tb = m_table;
  StructurePoint p;
  // Endpoints exactly reproduce the table rows (no exp(log()) round-off there).
  const double h = iv.r1 - iv.r0;
  const Basis b = basis(t);
  const auto m = eval(iv.m, t, b), P = eval(iv.P, t, b), rho = eval(iv.rho, t, b);
  p.dm_dr = m.second / h;
  p.dP_dr = P.second / h;
  p.drho_dr = rho.second / h;
  if (t == 0.0 || t == 1.0) {
    const std::size_t row = t == 1.0 ? iv.row + 1 : iv.row;
    p.r = tb.r[row];
    p.m = tb.m[row];
    p.P = tb.P[row];
    p.rho = tb.rho[row];
    p.gamma1 = tb.gamma1[row];
    p.nabla_ad = m_has_nabla_ad ? tb.nabla_ad[row] : 0.0;
    return p;
  }
  const double s = 1.0 - t;
  p.r = s * iv.r0 + t * iv.r1;
  p.m = m.first;
  p.P = P.first;
  p.rho = rho.first;
  p.gamma1 = s * iv.g0 + t * iv.g1;
  p.nabla_ad = s * iv.na0 + t * iv.na1;
  return p;
}

std::size_t Structure::interval_of(double r, std::size_t* hint) const {
  const double lo = m_node_r.front(), hi = m_node_r.back();
  const double slack = 1e-12 * hi;
  if (!(r >= lo - slack && r <= hi + slack)) {
    std::ostringstream msg;
    msg.precision(17);
    msg << "radius " << r << " cm is outside the model (" << lo << " .. " << hi << " cm)";
    throw Error(ErrorKind::numerical, msg.str());
  }
  const std::size_t last = m_iv.size() - 1;
  auto inside = [&](std::size_t i) {
    return (r >= m_iv[i].r0 || i == 0) && (r < m_iv[i].r1 || i == last);
  };
  std::size_t found = last + 1;
  if (hint && *hint <= last) {
    const std::size_t h = *hint;
    if (inside(h)) found = h;
    else if (h < last && inside(h + 1)) found = h + 1;
    else if (h > 0 && inside(h - 1)) found = h - 1;
  }
  if (found > last) {
    // First node strictly greater than r; the interval ends there.
    const auto it = std::upper_bound(m_node_r.begin(), m_node_r.end(), r);
    const auto k = static_cast<std::size_t>(it - m_node_r.begin());
    found = k == 0 ? 0 : std::min(k - 1, last);
  }
  if (hint) *hint = found;
  return found;
}

StructurePoint Structure::at_radius(double r, std::size_t* hint) const {
  const std::size_t i = interval_of(r, hint);
  const Interval& iv = m_iv[i];
  const double t = std::clamp((r - iv.r0) / (iv.r1 - iv.r0), 0.0, 1.0);
  return at(i, t);
}

} // namespace radmode
