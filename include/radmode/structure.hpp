#pragma once
// Structure: a StellarModel prepared for the pulsation solvers, with its coefficients
// interpolable anywhere in 0 <= r <= R (or r_in <= r <= R for an envelope). Shared by the
// finite-element assembly (discretize.hpp) and the shooting solver.
//
// Preparation rules (physics.md §3-4):
//  - Centre extension. With InnerCondition::centre and a model whose first point has
//    r_0 > 0, a point is added at r = 0 describing a uniform-density core of the innermost
//    density: rho_c = rho_0, m_c = 0, Gamma1_c = Gamma1_0, nabla_ad_c = nabla_ad_0 and
//    P_c = P_0 + (2 pi / 3) G rho_0^2 r_0^2 (hydrostatic equilibrium of that core).
//    extended_centre() reports whether this happened. With InnerCondition::rigid the model is
//    kept as it is (the innermost point is the inner boundary).
//  - Repeated radii (a composition discontinuity: two rows with the same r) give one node;
//    each table interval uses the values of its own side: the interval ending at r_d uses
//    the first row with r_d, the interval starting at r_d uses the second.
//  - Between the two rows of an interval (local coordinate t in [0, 1], r linear in t), each
//    interval using only its own rows' values and derivatives:
//      m:   cubic Hermite with dm/dr = 4 pi r^2 rho at both ends (mass conservation);
//      P:   cubic Hermite with dP/dr = -G m rho / r^2 at both ends (hydrostatic equilibrium),
//           in log P or in P, whichever satisfies hydrostatic equilibrium better at the
//           interval midpoint (log only when both ends are > 0);
//      rho: cubic Hermite in log rho with d ln rho/dr from three-point differences of the
//           table inside each segment between discontinuities;
//      Gamma1, nabla_ad: linear.
//    An interval whose outer row has rho = 0 (a polytrope-like surface) uses a power law of
//    the depth, rho = rho_0 ((r_1 - r)/(r_1 - r_0))^alpha, alpha = d ln rho / d ln(r_1 - r)
//    measured on the interval before it (0 < alpha <= 20), instead of a straight line.
//    A cubic is used only when it is monotone between the rows (Fritsch–Carlson condition:
//    end slopes of the secant's sign and a^2 + b^2 <= 9); otherwise, and wherever a needed
//    derivative does not exist (a zero density), the quantity falls back to linear in log when
//    both ends are > 0 and linear otherwise (e.g. a zero surface pressure).
//    Why cubic: with linear (or log-linear) interpolation the model itself carries an O(h^2)
//    error which Richardson extrapolation between FE meshes on the same coefficients cannot
//    remove; near a zero-pressure surface log-linear P even costs h^2 log h. On the uniform
//    sphere that limited omega^2 to ~4e-5 relative at 2,000 points; the cubics (exact there,
//    O(h^4) for smooth models) remove it.
//
// Units: cgs throughout (r cm, m g, P dyn cm^-2, rho g cm^-3; Gamma1, nabla_ad dimensionless).
#include "radmode/eigensolve.hpp"
#include "radmode/model.hpp"

#include <cmath>
#include <cstddef>
#include <optional>
#include <utility>
#include <vector>

namespace radmode {

/// Equilibrium quantities at one radius.
struct StructurePoint {
  double r = 0;        ///< radius [cm]
  double m = 0;        ///< mass inside r [g]
  double P = 0;        ///< pressure [dyn cm^-2]
  double rho = 0;      ///< density [g cm^-3]
  double gamma1 = 0;   ///< first adiabatic exponent
  double nabla_ad = 0; ///< adiabatic gradient (0 when the model has none: see has_nabla_ad())
  /// Derivatives of the interpolants above with respect to r (one-sided inside the interval
  /// at its ends): consistent with P, m, rho, so an ODE using them solves the same
  /// interpolated problem as the finite elements. [dyn cm^-3], [g cm^-1], [g cm^-4]
  double dP_dr = 0, dm_dr = 0, drho_dr = 0;
};

/// The values of a StructurePoint without r, nabla_ad and the derivatives: what the energy
/// form needs at a quadrature point (Structure::values_at). Units as in StructurePoint.
struct StructureValues {
  double m = 0, P = 0, rho = 0, gamma1 = 0;
};

class Structure {
public:
  /// Prepares `model` (validated first with validate_model: throws InputError when invalid).
  explicit Structure(const StellarModel& model, InnerCondition inner = InnerCondition::centre);

  /// Number of table intervals of positive length (= node_r().size() - 1).
  std::size_t interval_count() const noexcept { return m_iv.size(); }
  /// Unique radii, innermost first [cm]; interval i spans node_r()[i] .. node_r()[i+1].
  const std::vector<double>& node_r() const noexcept { return m_node_r; }
  /// True where the node is a discontinuity (repeated radius): the two intervals meeting there
  /// use different rows. Same size as node_r().
  const std::vector<bool>& discontinuity() const noexcept { return m_discontinuity; }
  /// The nodes flagged in discontinuity(), increasing.
  const std::vector<std::size_t>& discontinuity_nodes() const noexcept {
    return m_discontinuity_nodes;
  }

  /// Quantities inside interval i at local coordinate t in [0, 1] (r = r_i + t (r_{i+1} - r_i)).
  /// t = 0 and t = 1 reproduce that interval's own table rows exactly.
  StructurePoint at(std::size_t interval, double t) const;

  /// m, P, rho and Gamma1 of at(interval, t), bit for bit, without computing r, nabla_ad and
  /// the derivatives: the cheap evaluation used to sample the energy form. The midpoint
  /// t = 1/2 is stored by the preparation where it chose the pressure shape there.
  StructureValues values_at(std::size_t interval, double t) const;

  /// values_at(i, t[l]) for every interval i in [first, last) and l < q into
  /// out[(i - first) q + l], bit for bit: the same local coordinates in every interval (a
  /// quadrature rule), so the interpolation weights are computed once and each interval's
  /// shapes looked at once. Throws UsageError for q > max_rule_points or a bad range.
  static constexpr std::size_t max_rule_points = 8;
  void values_at_rule(std::size_t first, std::size_t last, const double* t, std::size_t q,
                      StructureValues* out) const;

  /// Flags of log_values_at: P (bit 0) or rho (bit 1) is given as its natural log.
  static constexpr unsigned log_P = 1, log_rho = 2;
  /// values_at(interval[k], t[k]) for k < count without exponentials: where the interval's
  /// curve for P or rho is interpolated in log space, out[k].P or out[k].rho is the log of the
  /// value (the argument of the exponential; exp of it is values_at's result bit for bit,
  /// except at t = 0 and 1, where it is the log of the table row as the preparation computed
  /// it) and logs[k] has log_P or log_rho set; the other values are values_at's. For
  /// differences of two interpolations of the same quantity: P_a - P_b =
  /// P_b expm1(ln P_a - ln P_b) has no cancellation. With `values`, values_at's results are
  /// stored there too, bit for bit (the exponentials evaluated together in one loop).
  void log_values_at(const std::size_t* interval, const double* t, std::size_t count,
                     StructureValues* out, unsigned char* logs,
                     StructureValues* values = nullptr) const;

  /// Interval containing radius r: r_i <= r < r_{i+1}; the last interval also contains R.
  /// A radius at a discontinuity belongs to the OUTER interval. `hint` (optional, in/out) is a
  /// previously returned index: neighbours of it are tried first, so marching in r is O(1).
  /// Throws Error(numerical) when r is outside [r_inner, R] (beyond a 1e-12 relative slack).
  std::size_t interval_of(double r, std::size_t* hint = nullptr) const;

  /// Quantities at radius r (interval_of, then at()). At a discontinuity: the outer side.
  StructurePoint at_radius(double r, std::size_t* hint = nullptr) const;

  double mass() const noexcept { return m_mass; }                  ///< M [g]
  double radius() const noexcept { return m_node_r.back(); }       ///< R [cm]
  double inner_radius() const noexcept { return m_node_r.front(); }///< 0 unless an envelope [cm]
  double surface_pressure() const noexcept { return m_surface_P; } ///< P_s [dyn cm^-2]
  bool extended_centre() const noexcept { return m_extended; }
  bool has_nabla_ad() const noexcept { return m_has_nabla_ad; }
  InnerCondition inner() const noexcept { return m_inner; }

  class RowSubset;

  /// The prepared table (with the added centre point when extended_centre()).
  const StellarModel& table() const noexcept { return m_table; }
  /// Table row at the left / right end of interval i.
  std::size_t left_row(std::size_t i) const { return m_iv[i].row; }
  std::size_t right_row(std::size_t i) const { return m_iv[i].row + 1; }

private:
  friend std::optional<Structure> every_other_row(const Structure& structure);
  struct Prepared {};
  /// Prepares a table that is already valid and needs no centre extension (every_other_row:
  /// a subset of the rows of a prepared table, both rows of each discontinuity kept), with
  /// its per-row values (m_row layout, the first row_columns_known columns filled) given.
  Structure(StellarModel&& table, InnerCondition inner, std::vector<double>&& rows, Prepared);
  /// Per-row values kept in m_row, column c at [c n, (c + 1) n) for n table rows: dm/dr,
  /// dP/dr, ln rho, ln P, d ln P/dr (each a function of its own row only, so a subset of the
  /// rows can take them over), and d ln rho/dr (finite differences: recomputed for a subset).
  enum RowColumn : std::size_t { dm_col, dP_col, lnrho_col, lnP_col, dlnP_col, dlnrho_col,
                                 row_columns };
  static constexpr std::size_t row_columns_known = dlnrho_col;
  /// Builds the intervals from m_table (the part of the preparation after the centre
  /// extension); computes the per-row values first unless `rows_known`.
  void prepare(bool rows_known);

  enum class Shape { linear, log_linear, hermite, log_hermite, power_to_zero };
  /// One quantity on one interval: end values f0, f1 and end derivatives per unit t, g0, g1
  /// (in log space for the log shapes).
  struct Curve {
    double f0, f1, g0, g1;
    Shape shape;
  };
  struct Interval {
    Interval() {} // members left uninitialized: prepare() sets every one
    std::size_t row; ///< table row at the left end (right end is row + 1)
    double r0, r1, g0, g1, na0, na1;
    Curve m, P, rho;
  };
  /// The table columns an interval is built from: the table's (nabla_ad null when absent) and
  /// the per-row values of m_row's layout.
  struct Columns {
    const double *r, *m, *P, *rho, *gamma1, *nabla_ad;
    const double *dm, *dP, *lnrho, *lnP, *dlnP, *dlnrho;
  };
  /// The interval between rows j and j1 of c (d ln rho/dr at dlnrho[d0], dlnrho[d1]; `before`
  /// the row before j in the same table when has_before), as prepare() builds it, into iv.
  /// Returns true when the pressure shape is left to choose_pressure; then the logs (or, for a
  /// curve not in log space, the values) of P and rho at t = 1/2 are stored in v.
  static bool build_interval(Interval& iv, StructureValues& v, const Columns& c, std::size_t j,
                             std::size_t j1, std::size_t d0, std::size_t d1, bool has_before,
                             std::size_t before);
  /// For the intervals with `known` set: exp of the logs build_interval stored, in one loop.
  static void midpoint_exponentials(const Interval* iv, StructureValues* mid_values,
                                    const unsigned char* known, std::size_t count);
  /// The choice between iv's log cubic for P and the linear cubic with end values P0, P1 and
  /// end derivatives dP0, dP1 [dyn cm^-3] (see prepare); completes the midpoint values v.
  static void choose_pressure(Interval& iv, StructureValues& v, double P0, double P1,
                              double dP0, double dP1);
  /// log_values_inside for an interval of the common shapes (m hermite, P and rho
  /// log_hermite), without looking at the shapes: the same arithmetic. Returns the flags.
  static unsigned char common_log_values(const Interval& iv, double t, StructureValues& out) {
    const Basis b = basis(t);
    out.m = hermite(iv.m, b);
    out.gamma1 = (1.0 - t) * iv.g0 + t * iv.g1;
    out.P = hermite(iv.P, b);
    out.rho = hermite(iv.rho, b);
    return log_P | log_rho;
  }
  /// log_values for 0 < t < 1 on one interval (Structure::log_values' arithmetic).
  static unsigned log_values_inside(const Interval& iv, double t, StructureValues& out);
  /// Cubic Hermite basis at one t: values h00, h10, h01, h11 and their t-derivatives.
  struct Basis {
    double h00, h10, h01, h11, d00, d10, d01, d11;
  };
  static Basis basis(double t);
  /// Interpolant for one quantity (see the file comment), written into `out`, from its end
  /// values f0, f1 and end derivatives per unit t g0, g1, and when f0, f1 > 0 (unused
  /// otherwise) the same of its log: lf0, lf1, lg0, lg1. For the pressure, when both the log
  /// and the linear cubic are usable, `out` is the log cubic and true is returned: the caller
  /// picks one by the hydrostatic residual at the midpoint.
  static bool shape_for(Curve& out, double f0, double f1, double g0, double g1, double lf0,
                        double lf1, double lg0, double lg1, bool pressure);
  /// For a log-space curve (log_hermite, log_linear): its log at t into `arg` (exp(arg) is
  /// value(c, t, b), bit for bit) and true; false otherwise (arg untouched).
  /// The cubic Hermite combination of c's end values and slopes at the point of b.
  static double hermite(const Curve& c, const Basis& b) {
    return b.h00 * c.f0 + b.h10 * c.g0 + b.h01 * c.f1 + b.h11 * c.g1;
  }
  static bool log_argument(const Curve& c, double t, const Basis& b, double& arg) {
    if (c.shape == Shape::log_hermite) {
      arg = hermite(c, b);
      return true;
    }
    if (c.shape == Shape::log_linear) {
      arg = c.f0 + t * (c.f1 - c.f0);
      return true;
    }
    return false;
  }
  static void set_curve(Curve& c, double f0, double f1, double g0, double g1, Shape shape) {
    c.f0 = f0;
    c.f1 = f1;
    c.g0 = g0;
    c.g1 = g1;
    c.shape = shape;
  }
  /// values_at_rule for Q points (a compile-time count).
  template <std::size_t Q>
  void values_at_rule_fixed(std::size_t first, std::size_t last, const double* t,
                            StructureValues* out) const;
  /// log_values_at for one point; returns the flags.
  unsigned log_values(std::size_t interval, double t, StructureValues& out) const;
  /// Value and derivative with respect to t (b = basis(t), used by the Hermite shapes).
  static std::pair<double, double> eval(const Curve& c, double t, const Basis& b);
  /// Value only.
  static double value(const Curve& c, double t, const Basis& b);

  StellarModel m_table;
  std::vector<double> m_row; ///< per-row values (RowColumn)
  std::vector<Interval> m_iv;
  /// Per interval: the values at t = 1/2 where m_mid_known (kept from the pressure choice;
  /// not in Interval: a larger record measurably slowed the preparation).
  std::vector<StructureValues> m_mid;
  std::vector<unsigned char> m_mid_known;
  /// Per interval: the common shapes of a smooth model (m hermite, P and rho log_hermite, the
  /// midpoint values kept), evaluated by the samplers without looking at the shapes.
  std::vector<unsigned char> m_common;
  std::vector<double> m_node_r;
  std::vector<bool> m_discontinuity;
  std::vector<std::size_t> m_discontinuity_nodes;
  double m_mass = 0, m_surface_P = 0;
  bool m_extended = false, m_has_nabla_ad = false;
  InnerCondition m_inner = InnerCondition::centre;
};

/// every_other_row's interpolation without its Structure: only the curves of its intervals,
/// built with the same arithmetic from the rows of the full structure (no copy of the table,
/// no validation, no node or discontinuity lists), for log_values_at. The interpolation-error
/// estimate of solve_modes evaluates it at the model's midpoints and dropped rows.
class Structure::RowSubset {
public:
  /// The intervals between the base nodes `kept` of `full` (every_other_node_keeping(
  /// full.interval_count(), full.discontinuity_nodes()): increasing, from 0 to
  /// interval_count()); with those nodes, the intervals of every_other_row(full). Throws
  /// UsageError for another list.
  RowSubset(const Structure& full, const std::vector<std::size_t>& kept);
  std::size_t interval_count() const noexcept { return m_iv.size(); }
  /// The number of rows of every_other_row(full)'s table (every_other_row gives nullopt
  /// below StellarModel::min_points).
  std::size_t table_rows() const noexcept { return m_table_rows; }
  /// Structure::log_values_at (without `values`) of every_other_row(full), bit for bit, for
  /// 0 < t < 1. At t = 0 and 1 the values are the curves' end values: the rows', except that
  /// a zero surface density is +0.
  void log_values_at(const std::size_t* interval, const double* t, std::size_t count,
                     StructureValues* out, unsigned char* logs) const;

private:
  std::vector<Interval> m_iv;
  std::size_t m_table_rows = 0;
};

// Inline so that the form samplers (discretize.cpp) compile the evaluation into their loops.
inline Structure::Basis Structure::basis(double t) {
  const double t2 = t * t, t3 = t2 * t;
  return {2 * t3 - 3 * t2 + 1, t3 - 2 * t2 + t, -2 * t3 + 3 * t2, t3 - t2,
          6 * t2 - 6 * t,      3 * t2 - 4 * t + 1, -6 * t2 + 6 * t, 3 * t2 - 2 * t};
}

inline double Structure::value(const Curve& c, double t, const Basis& b) {
  // The first member of eval(c, t, b), with the same arithmetic.
  switch (c.shape) {
  case Shape::linear:
    return c.f0 + t * (c.f1 - c.f0);
  case Shape::log_linear:
    return std::exp(c.f0 + t * (c.f1 - c.f0));
  case Shape::power_to_zero:
    return c.f0 * std::pow(1.0 - t, c.g0);
  case Shape::hermite:
    return hermite(c, b);
  case Shape::log_hermite:
  default:
    return std::exp(hermite(c, b));
  }
}

inline StructureValues Structure::values_at(std::size_t interval, double t) const {
  const Interval& iv = m_iv[interval];
  if (t == 0.0 || t == 1.0) {
    const std::size_t row = t == 1.0 ? iv.row + 1 : iv.row;
    return {m_table.m[row], m_table.P[row], m_table.rho[row], m_table.gamma1[row]};
  }
  if (t == 0.5 && m_mid_known[interval]) return m_mid[interval];
  const Basis b = basis(t);
  return {value(iv.m, t, b), value(iv.P, t, b), value(iv.rho, t, b),
          (1.0 - t) * iv.g0 + t * iv.g1};
}

} // namespace radmode
