#include "radmode/diagnostics.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "text_format.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>

namespace radmode {

namespace {

using constants::G;
using constants::pi;
constexpr double four_thirds = 4.0 / 3.0;

std::string num(double x) { return detail::sig(x, 4); }

void require_positive(const char* name, double v) {
  if (!(v > 0.0) || !std::isfinite(v))
    throw UsageError("diagnostics option " + std::string(name) + " = " + num(v) +
                     ": expected a finite number > 0");
}

/// Second-order three-point derivative of y with respect to x at the middle point of a
/// non-uniform stencil (x0 < x1 < x2), h1 = x1 - x0, h2 = x2 - x1:
///   y'(x1) = [h1^2 (y2 - y1) + h2^2 (y1 - y0)] / [h1 h2 (h1 + h2)],
/// the weights -h2/(h1 (h1+h2)), (h2-h1)/(h1 h2), h1/(h2 (h1+h2)) of y0, y1, y2 over a common
/// denominator (one division; the differences of y keep the cancellation small).
double derivative3(double x0, double x1, double x2, double y0, double y1, double y2) {
  const double h1 = x1 - x0, h2 = x2 - x1;
  return (h1 * h1 * (y2 - y1) + h2 * h2 * (y1 - y0)) / (h1 * h2 * (h1 + h2));
}

/// Index of the nearest point before i whose x(j) differs from x(i) (or npos); x(j) is the
/// stencil coordinate of point j, n the number of points.
constexpr std::size_t npos = static_cast<std::size_t>(-1);
template <class X> std::size_t distinct_before(X x, std::size_t i) {
  const double xi = x(i);
  for (std::size_t j = i; j-- > 0;)
    if (x(j) != xi) return j;
  return npos;
}
template <class X> std::size_t distinct_after(X x, std::size_t n, std::size_t i) {
  const double xi = x(i);
  for (std::size_t j = i + 1; j < n; ++j)
    if (x(j) != xi) return j;
  return npos;
}

/// Smallest change of P (and, for the mass form, of m) relative to the value at the point that
/// the HSE stencil must span on each side: a table printed with 6 significant digits still
/// gives such differences to 1 %.
constexpr double hse_min_relative_change = 1e-4;

/// Moves a stencil end from `start` towards `limit` (below it when `down`, else above) while
/// too_close says the point is not resolved and the limit is not reached; returns where it
/// stops and sets `still_close` to too_close there. With `monotone` (once too_close is false it
/// stays false further out, as when P and m are monotonic along the table), the stop is found
/// by galloping and bisection in O(log n) evaluations instead of one step at a time; the stop
/// is the same point.
template <bool down, class TooClose>
std::size_t widen(std::size_t start, std::size_t limit, TooClose too_close, bool monotone,
                  bool& still_close) {
  auto move = [](std::size_t j, std::size_t k) { return down ? j - k : j + k; };
  auto distance = [](std::size_t from, std::size_t to) { return down ? from - to : to - from; };
  std::size_t j = start;
  still_close = too_close(j);
  if (!monotone) {
    while (still_close && j != limit) still_close = too_close(j = move(j, 1));
    return j;
  }
  if (j == limit || !still_close) return j;
  std::size_t close = j, far = limit; // too_close(close); !too_close(far) once found
  for (std::size_t step = 1;; step *= 2) {
    if (step >= distance(close, limit)) {
      still_close = too_close(limit);
      if (still_close) return limit;
      far = limit;
      break;
    }
    far = move(close, step);
    if (!too_close(far)) break;
    close = far;
  }
  while (distance(close, far) > 1) {
    const std::size_t mid = move(close, distance(close, far) / 2);
    (too_close(mid) ? close : far) = mid;
  }
  still_close = false;
  return far;
}

/// Relative HSE residual at point i with the derivative of y (the pressure) with respect to x
/// over neighbours a < i < b, against `target` (the exact dy/dx in equilibrium, < 0). The
/// neighbours start as the nearest points with distinct x and move outwards while
/// `too_close(j)` says the difference between points j and i is not resolved by the table's
/// digits (near the centre of a finely meshed model P hardly changes between points; in the
/// envelope m does not); `monotone` as in widen. NaN when there is no such stencil or
/// `resolved(a, b)` says the stencil cannot resolve the profile.
template <class X, class TooClose, class Resolved>
double residual_form(X x, const std::vector<double>& y, std::size_t i, double target,
                     TooClose too_close, bool monotone, Resolved resolved) {
  const std::size_t n = y.size();
  std::size_t a = distinct_before(x, i), b = distinct_after(x, n, i);
  if (a == npos || b == npos || !(target < 0.0)) return std::numeric_limits<double>::quiet_NaN();
  bool a_close = false, b_close = false;
  a = widen<true>(a, 0, too_close, monotone, a_close);
  if (a_close) return std::numeric_limits<double>::quiet_NaN();
  b = widen<false>(b, n - 1, too_close, monotone, b_close);
  if (b_close) return std::numeric_limits<double>::quiet_NaN();
  const double xa = x(a), xi = x(i), xb = x(b);
  if (xa == xi || xb == xi || !resolved(a, b)) return std::numeric_limits<double>::quiet_NaN();
  const double d = derivative3(xa, xi, xb, y[a], y[i], y[b]);
  return std::abs(d - target) / std::abs(target);
}

void warn(ModelDiagnostics& d, std::string code, std::string message) {
  d.warnings.push_back({std::move(code), std::move(message)});
}

std::string where_text(const StellarModel& model, std::size_t i) {
  std::string s = "r = " + num(model.r[i]) + " cm (r/R = " + num(model.r[i] / model.radius()) +
                  ", m/M = " + num(model.m[i] / model.mass()) + ")";
  if (i < model.line.size() && model.line[i] > 0)
    s += ", " + (model.source.empty() ? std::string("line ") : model.source + " line ") +
         std::to_string(model.line[i]);
  else
    s += ", point " + std::to_string(i + 1);
  return s;
}

void find_gamma1_zones(const StellarModel& model, ModelDiagnostics& d) {
  const std::size_t n = model.size();
  auto below = [&](std::size_t i) { return model.gamma1[i] < four_thirds; };
  // Crossing between points i-1 and i (one below, one not): linear in r for Gamma1 and m.
  auto crossing = [&](std::size_t i, double& r, double& m) {
    const double g0 = model.gamma1[i - 1], g1 = model.gamma1[i];
    const double t = g1 != g0 ? (four_thirds - g0) / (g1 - g0) : 0.5;
    r = model.r[i - 1] + t * (model.r[i] - model.r[i - 1]);
    m = model.m[i - 1] + t * (model.m[i] - model.m[i - 1]);
  };
  auto line_of = [&](std::size_t i) -> std::size_t {
    return i < model.line.size() ? model.line[i] : 0;
  };
  std::size_t i = 0;
  while (i < n) {
    if (!below(i)) {
      ++i;
      continue;
    }
    Gamma1Zone z;
    if (i == 0) {
      z.r_inner_cm = model.r[0];
      z.m_inner_g = model.m[0];
    } else {
      crossing(i, z.r_inner_cm, z.m_inner_g);
    }
    z.first_line = line_of(i);
    z.gamma1_min = model.gamma1[i];
    std::size_t j = i;
    while (j + 1 < n && below(j + 1)) {
      ++j;
      z.gamma1_min = std::min(z.gamma1_min, model.gamma1[j]);
    }
    z.last_line = line_of(j);
    if (j + 1 == n) {
      z.r_outer_cm = model.r[j];
      z.m_outer_g = model.m[j];
    } else {
      crossing(j + 1, z.r_outer_cm, z.m_outer_g);
    }
    d.gamma1_below_4_3_zones.push_back(z);
    i = j + 1;
  }
}


/// The hydrostatic-equilibrium residual of diagnostics.hpp over the interior points, into
/// d.hse_*; the same result, bit for bit, as evaluating both forms at every point. `by_r` and
/// `s` are scratch for n doubles each. Arrangement:
///  1. The radius form at every point with the nearest neighbours as its stencil, in one loop
///     without branches; points whose stencil must widen (a repeated radius or P unresolved
///     next to the point) are marked and redone by the stencil search (residual_form).
///  2. The mass form needs s = m^(2/3) (a cube root, the costliest operation per point) and a
///     stencil search of its own. The residual of a point is the smaller of the two forms and
///     only the largest residual (its first point) is reported, so the mass form is evaluated
///     only where it can matter: where the radius form is unusable, or where the radius form
///     is neither below a residual known to be reached (the full residual at the point where
///     the radius form is largest) nor below the largest residual so far. Elsewhere the point
///     counts as checked and cannot hold the maximum. Cube roots are taken on demand, once.
void hse_residual(const StellarModel& model, double p_floor, bool p_monotone, bool m_monotone,
                  double* by_r, double* s, ModelDiagnostics& d) {
  const double* const r = model.r.data();
  const double* const m = model.m.data();
  const double* const P = model.P.data();
  const double* const rho = model.rho.data();
  const std::size_t n = model.size();
  const double eps = hse_min_relative_change;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  constexpr double widen_marker = -1.0; // not a residual (those are >= 0 or NaN)

  // Exact dP/dr = -G m rho / r^2 at point i (used where r > 0).
  auto radius_target = [&](std::size_t i) { return -(G * m[i] * rho[i] / (r[i] * r[i])); };
  // Radius form only where P changes by less than a factor 2 across the stencil (next to a
  // power-law zero of P the three-point difference has an O(1) error).
  auto p_resolved = [&](std::size_t a, std::size_t b) {
    return std::min(P[a], P[b]) >= 0.5 * std::max(P[a], P[b]);
  };
  // (two loops: with a division inside a conditional expression the compiler branches
  // around it and the loop no longer vectorizes; bitwise & makes every comparison)
  double* const target_r = s; // s is filled later
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double target = radius_target(i);
    const double slope = derivative3(r[i - 1], r[i], r[i + 1], P[i - 1], P[i], P[i + 1]);
    by_r[i] = std::abs(slope - target) / std::abs(target);
    target_r[i] = target;
  }
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double before = P[i - 1], after = P[i + 1];
    const double lower = after < before ? after : before; // std::min, std::max
    const double higher = before < after ? after : before;
    // (Bitwise & on 0/1 integers: no branches, so the loop vectorizes.)
    const bool nearest = (int(r[i - 1] != r[i]) & int(r[i + 1] != r[i]) &
                          int(!(std::abs(before - P[i]) < eps * P[i])) &
                          int(!(std::abs(after - P[i]) < eps * P[i]))) != 0;
    const bool usable = (int(target_r[i] < 0.0) & int(lower >= 0.5 * higher)) != 0; // as p_resolved
    const double value = usable ? by_r[i] : nan;
    by_r[i] = nearest ? value : widen_marker;
  }
  auto radius_form = [&](std::size_t i) {
    return residual_form(
        [&](std::size_t j) { return r[j]; }, model.P, i, radius_target(i),
        [&](std::size_t j) { return std::abs(P[j] - P[i]) < eps * P[i]; }, p_monotone,
        p_resolved);
  };

  // Mass form: dP/ds = -3 G m^(4/3) / (8 pi r^4), m^(4/3) = s^2 and r^4 = (r^2)^2; the mass
  // differences must be resolved as well.
  std::fill(s, s + n, -1.0);
  auto s_at = [&](std::size_t j) {
    if (s[j] < 0.0) s[j] = std::cbrt(m[j] * m[j]);
    return s[j];
  };
  auto mass_form = [&](std::size_t i) {
    const double si = s_at(i), r2 = r[i] * r[i];
    const double target = -3.0 * G * (si * si) / (8.0 * pi * (r2 * r2));
    return residual_form(
        s_at, model.P, i, target,
        [&](std::size_t j) {
          return std::abs(P[j] - P[i]) < eps * P[i] || std::abs(m[j] - m[i]) < eps * m[i];
        },
        p_monotone && m_monotone, [](std::size_t, std::size_t) { return true; });
  };
  // The residual kept at a point: the smaller usable form (NaN when neither is usable).
  auto smaller = [](double by_radius, double by_mass) {
    if (std::isnan(by_radius)) return by_mass;
    if (std::isnan(by_mass)) return by_radius;
    return std::min(by_radius, by_mass);
  };
  auto skipped = [&](std::size_t i) { return !(r[i] > 0.0) || !(m[i] > 0.0) || P[i] < p_floor; };

  // Widened radius-form stencils, and the point where the radius form is largest.
  std::size_t top = npos;
  double top_value = -1.0;
  for (std::size_t i = 1; i + 1 < n; ++i) {
    if (skipped(i)) continue;
    if (by_r[i] == widen_marker) by_r[i] = radius_form(i);
    if (by_r[i] > top_value) {
      top_value = by_r[i];
      top = i;
    }
  }
  double reached = -1.0; // a residual that some checked point has
  double top_mass = nan;
  if (top != npos) {
    top_mass = mass_form(top);
    reached = smaller(by_r[top], top_mass);
  }

  double worst = -1;
  std::size_t worst_index = 0, checked = 0, not_checked = 0;
  for (std::size_t i = 1; i + 1 < n; ++i) {
    if (skipped(i)) {
      ++not_checked;
      continue;
    }
    const double by_radius = by_r[i];
    if (!std::isnan(by_radius) && (by_radius < reached || by_radius <= worst)) {
      ++checked; // its residual is at most by_radius: not the largest
      continue;
    }
    const double res = smaller(by_radius, i == top ? top_mass : mass_form(i));
    if (std::isnan(res)) {
      ++not_checked;
      continue;
    }
    ++checked;
    if (res > worst) {
      worst = res;
      worst_index = i;
    }
  }
  d.hse_points_checked = checked;
  d.hse_points_skipped = not_checked;
  d.hse_worst_index = worst_index;
  if (d.hse_points_checked > 0) {
    d.hse_residual_max = worst;
    d.hse_worst_r_cm = r[d.hse_worst_index];
    d.hse_worst_m_g = m[d.hse_worst_index];
    d.hse_worst_line = d.hse_worst_index < model.line.size() ? model.line[d.hse_worst_index] : 0;
  }
}

} // namespace

void DiagnosticsOptions::validate() const {
  require_positive("hse_warn", hse_warn);
  require_positive("mass_warn", mass_warn);
  require_positive("compactness_warn", compactness_warn);
  if (!(hse_pressure_floor >= 0.0 && hse_pressure_floor < 1.0))
    throw UsageError("diagnostics option hse_pressure_floor = " + num(hse_pressure_floor) +
                     ": expected a number in [0, 1)");
}

const char* pn_energy_name(PnEnergy e) noexcept {
  return e == PnEnergy::model ? "model" : "radiation_limit";
}

ModelDiagnostics diagnose(const StellarModel& model, const DiagnosticsOptions& options) {
  options.validate();
  const std::size_t n = model.size();
  if (n < 3 || model.m.size() != n || model.P.size() != n || model.rho.size() != n ||
      model.gamma1.size() != n)
    throw Error(ErrorKind::numerical, "diagnostics need a validated model with at least 3 points");

  ModelDiagnostics d;
  const double* const r = model.r.data();
  const double* const m = model.m.data();
  const double* const P = model.P.data();
  const double* const rho = model.rho.data();
  const double* const g1 = model.gamma1.data();
  const double M = model.mass(), R = model.radius();
  if (!(M > 0.0) || !(R > 0.0))
    throw Error(ErrorKind::numerical, model.source + ": total mass and radius must be > 0");

  d.points = n;
  d.mass_g = M;
  d.radius_cm = R;
  d.mean_density_g_cm3 = 3.0 * M / (4.0 * pi * R * R * R);
  d.rho_c_g_cm3 = rho[0];
  d.rho_c_over_mean = rho[0] / d.mean_density_g_cm3;
  d.has_centre = model.has_centre();
  d.surface_pressure = model.surface_pressure();

  // Per-point quantities in loops without branches, so that the compiler can vectorize the
  // divisions and square roots; the sums follow in one pass, each in table order as before.
  // P / rho [erg g^-1] is taken as 0 at a zero-pressure surface point where rho = 0 too (the
  // limit for a polytrope, where P/rho is proportional to theta). G/r and G m/r are 0 at r = 0.
  // One block of scratch for all of them (uninitialized: every entry used is written first).
  const bool has_u = model.u.size() == n;
  // stability_only: what the verdicts need (see DiagnosticsOptions), each by the same
  // arithmetic as the full run; `full` is everything else.
  const bool full = !options.stability_only;
  const bool model_energy = full || options.pn_energy == PnEnergy::model;
  std::unique_ptr<double[]> scratch(new double[11 * n]);
  double* const p_rho = scratch.get();
  double* const c_s = p_rho + n;    // sound speed [cm s^-1]
  double* const cell = c_s + n;     // 2 dr / (c_i-1 + c_i) of cell i [s]; later HSE scratch
  double* const gm_r = cell + n;    // G m / r [erg g^-1]
  double* const g_r = gm_r + n;     // G / r [cm^2 s^-2 g^-1]
  double* const u_ratio = g_r + n;  // P / ((Gamma1 - 1) rho) [erg g^-1]; later HSE scratch
  double* const integrands = u_ratio + n; // 5 n: the integrands of the integrals in r
  // (the replacements in loops of their own: with a division inside a conditional
  // expression the compiler branches around it and the loop no longer vectorizes)
  // (few arrays per loop: each pair of input and output needs a run-time overlap test)
  for (std::size_t i = 0; i < n; ++i) p_rho[i] = P[i] / rho[i]; // 0/0: replaced below
  for (std::size_t i = 0; i < n; ++i) {
    g_r[i] = G / r[i];
    gm_r[i] = G * m[i] / r[i];
  }
  for (std::size_t i = 0; i < n; ++i) {
    p_rho[i] = P[i] == 0.0 ? 0.0 : p_rho[i];
    g_r[i] = r[i] > 0.0 ? g_r[i] : 0.0;
    gm_r[i] = r[i] > 0.0 ? gm_r[i] : 0.0;
  }
  // (a loop of its own: std::sqrt may set errno, which keeps a loop from vectorizing)
  const bool checks = options.checks && full;
  if (checks) {
    for (std::size_t i = 0; i < n; ++i) c_s[i] = std::sqrt(g1[i] * p_rho[i]);
    for (std::size_t i = 1; i < n; ++i) cell[i] = 2.0 * (r[i] - r[i - 1]) / (c_s[i - 1] + c_s[i]);
  }
  if (!has_u && model_energy)
    for (std::size_t i = 0; i < n; ++i) u_ratio[i] = p_rho[i] / (g1[i] - 1.0);
  const double* const u_model = has_u ? model.u.data() : u_ratio;

  // Time scales.
  d.t_dyn_s = 1.0 / std::sqrt(G * d.mean_density_g_cm3);
  d.t_kepler_s = std::sqrt(R * R * R / (G * M));
  d.t_freefall_s = std::sqrt(3.0 * pi / (32.0 * G * d.mean_density_g_cm3));

  // The sums (trapezoid rules, each in table order) and the extremes, in three passes with
  // few running values each (with many, they no longer fit the registers and every addition
  // waits for a store and a load):
  //  1. sound-crossing time (cells of zero width skipped; infinite when c_s vanishes on both
  //     ends of a cell); minimum Gamma1 (its first point, as std::min_element), max P,
  //     Gamma1 > 1 everywhere, and whether P is non-increasing and m non-decreasing along the
  //     table (then "not resolved" in the HSE check holds on a contiguous run next to each
  //     point);
  //  2. integrals in r: mass, pressure moments, inertia of xi = const (integrands per point
  //     first, in a loop that vectorizes);
  //  3. post-Newtonian integrals in m (physics.md section 5), b G^2 M^3 / R^2 [g cm^4 s^-4]
  //     for u = 3 P / rho (b_rad) and the model's u (b_model): U(r) = int u dm,
  //     Omega(r) = int G m / r dm (whose total is |W|).
  double t_sound = 0;
  bool sound_infinite = false;
  std::size_t g1_min_index = 0;
  double g1_min = g1[0], p_max = P[0];
  bool g1_above_1 = g1[0] > 1.0;
  bool p_monotone = true, m_monotone = true;
  for (std::size_t i = 1; i < n && full; ++i) {
    if (checks && r[i] - r[i - 1] != 0.0) {
      if (c_s[i - 1] + c_s[i] == 0.0)
        sound_infinite = true;
      else
        t_sound += cell[i];
    }
    // (bitwise &: no branches for the flags)
    g1_min_index = g1[i] < g1_min ? i : g1_min_index;
    g1_min = g1[i] < g1_min ? g1[i] : g1_min;
    p_max = P[i] > p_max ? P[i] : p_max;
    g1_above_1 = g1_above_1 & (g1[i] > 1.0);
    p_monotone = p_monotone & (P[i] <= P[i - 1]);
    m_monotone = m_monotone & (m[i] >= m[i - 1]);
  }
  if (!full && model_energy)
    for (std::size_t i = 1; i < n; ++i) g1_above_1 = g1_above_1 & (g1[i] > 1.0);

  double mass_int = 0, p_int = 0, g1p_int = 0, excess_int = 0, inertia_int = 0;
  {
    double* const f_mass = integrands;
    double* const f_p = f_mass + n;
    double* const f_g1p = f_p + n;
    double* const f_excess = f_g1p + n;
    double* const f_inertia = f_excess + n;
    // (Each sum in a loop with few others; the pressure moments, which the stability verdicts
    // need, apart from the rest, which stability_only skips. Every sum in table order.)
    for (std::size_t k = 0; k < n; ++k) {
      f_p[k] = P[k] * r[k] * r[k];
      f_g1p[k] = g1[k] * P[k] * r[k] * r[k];
    }
    for (std::size_t i = 1; i < n; ++i) {
      const double dr = r[i] - r[i - 1];
      p_int += 0.5 * dr * (f_p[i - 1] + f_p[i]);
      g1p_int += 0.5 * dr * (f_g1p[i - 1] + f_g1p[i]);
    }
    if (full) {
      for (std::size_t k = 0; k < n; ++k) {
        f_mass[k] = 4.0 * pi * r[k] * r[k] * rho[k];
        f_excess[k] = (g1[k] - four_thirds) * P[k] * r[k] * r[k];
        f_inertia[k] = rho[k] * r[k] * r[k] * r[k] * r[k];
      }
      for (std::size_t i = 1; i < n; ++i) {
        const double dr = r[i] - r[i - 1];
        auto trap = [&](const double* f) { return 0.5 * dr * (f[i - 1] + f[i]); };
        mass_int += trap(f_mass);
        excess_int += trap(f_excess);
        inertia_int += trap(f_inertia);
      }
    }
  }

  double U_rad = 0, U_model = 0, Omega = 0, b_rad = 0, b_model = 0;
  // The integrand of b at point i for internal energy u and its integral U up to i.
  auto pn_integrand = [&](std::size_t i, double u, double U) {
    const double gr = gm_r[i];
    return (r[i] > 0.0 ? g_r[i] * (U - Omega) : 0.0) + 0.5 * gr * gr + gr * (u + p_rho[i]);
  };
  // (with_model: also b_model; the other sums' arithmetic is the same either way)
  auto pn_pass = [&](auto with_model) {
    constexpr bool both = decltype(with_model)::value;
    double f_rad = pn_integrand(0, 3.0 * p_rho[0], 0.0);
    double f_model = both ? pn_integrand(0, u_model[0], 0.0) : 0.0;
    for (std::size_t i = 1; i < n; ++i) {
      const double dm = m[i] - m[i - 1];
      const double u_rad = 3.0 * p_rho[i];
      U_rad += 0.5 * (u_rad + 3.0 * p_rho[i - 1]) * dm;
      if (both) U_model += 0.5 * (u_model[i] + u_model[i - 1]) * dm;
      Omega += 0.5 * (gm_r[i] + gm_r[i - 1]) * dm;
      const double fa = pn_integrand(i, u_rad, U_rad);
      b_rad += 0.5 * (fa + f_rad) * dm;
      f_rad = fa;
      if (both) {
        const double fb = pn_integrand(i, u_model[i], U_model);
        b_model += 0.5 * (fb + f_model) * dm;
        f_model = fb;
      }
    }
  };
  if (model_energy) pn_pass(std::true_type{});
  else pn_pass(std::false_type{});
  d.t_sound_s = !checks         ? std::numeric_limits<double>::quiet_NaN()
                : sound_infinite ? std::numeric_limits<double>::infinity()
                                 : t_sound;
  if (!(p_int > 0.0))
    throw Error(ErrorKind::numerical,
                model.source + ": the pressure integral is zero; Gamma1 averages are undefined");

  constexpr double not_computed = std::numeric_limits<double>::quiet_NaN();
  d.gamma1_pressure_weighted = g1p_int / p_int;
  if (full) {
    d.mass_integral_g = mass_int;
    const double dm_table = M - m[0];
    d.mass_consistency = dm_table > 0.0 ? std::abs(dm_table - mass_int) / dm_table
                                        : std::numeric_limits<double>::infinity();
    d.gamma1_min = g1[g1_min_index];
    d.gamma1_min_r_cm = r[g1_min_index];
    find_gamma1_zones(model, d);
    const double inertia = inertia_int + std::pow(R, 6) * d.surface_pressure / (G * M);
    d.omega2_homologous = 9.0 * excess_int / inertia;
    d.sigma2_homologous = d.omega2_homologous * R * R * R / (G * M);
  } else {
    d.mass_integral_g = d.mass_consistency = not_computed;
    d.gamma1_min = d.gamma1_min_r_cm = not_computed;
    d.omega2_homologous = d.sigma2_homologous = not_computed;
  }

  if (checks)
    hse_residual(model, options.hse_pressure_floor * p_max, p_monotone, m_monotone, cell,
                 u_ratio, d);

  // Post-Newtonian coefficient.
  d.compactness = 2.0 * G * M / (R * constants::c_light * constants::c_light);
  d.binding_a = Omega * R / (G * M * M); // |W| = int G m dm / r
  d.model_has_u = has_u;
  const bool model_u_defined = has_u || g1_above_1;
  const double scale = G * G * M * M * M / (R * R);
  d.pn_coefficient_radiation_limit = b_rad / scale / (3.0 * d.binding_a);
  d.pn_coefficient_model_energy = std::numeric_limits<double>::quiet_NaN();
  if (model_u_defined && model_energy)
    d.pn_coefficient_model_energy = b_model / scale / (3.0 * d.binding_a);
  else if (options.pn_energy == PnEnergy::model)
    throw Error(ErrorKind::numerical,
                model.source + ": the post-Newtonian coefficient with the model's internal "
                               "energy needs a u column or Gamma1 > 1 everywhere");
  d.pn_energy = options.pn_energy;
  d.pn_coefficient = options.pn_energy == PnEnergy::model ? d.pn_coefficient_model_energy
                                                         : d.pn_coefficient_radiation_limit;
  d.gamma1_critical_pn = four_thirds + d.pn_coefficient * d.compactness;
  d.pn_unstable = d.gamma1_pressure_weighted < d.gamma1_critical_pn;
  if (!full) return d; // (no warnings)

  // Warnings.
  if (!d.has_centre)
    warn(d, "no_centre",
         "the model does not reach r = 0 (innermost point at r = " + num(r[0]) +
             " cm, m = " + num(m[0]) + " g); central density, the mass check and the integrals "
             "cover the tabulated part only");
  if (!checks) {
    // (not looked at: no warnings about them)
  } else if (d.hse_points_checked == 0)
    warn(d, "hse_unchecked", "no interior point could be checked for hydrostatic equilibrium");
  else if (d.hse_residual_max > options.hse_warn)
    warn(d, "hse_residual",
         "hydrostatic equilibrium residual " + num(d.hse_residual_max) + " exceeds " +
             num(options.hse_warn) + "; worst at " + where_text(model, d.hse_worst_index));
  if (!(d.mass_consistency <= options.mass_warn))
    warn(d, "mass_inconsistent",
         "m column and integral of 4 pi r^2 rho dr differ by a relative " +
             num(d.mass_consistency) + " (threshold " + num(options.mass_warn) + ")");
  if (checks && !std::isfinite(d.t_sound_s))
    warn(d, "sound_time_infinite",
         "the sound speed vanishes on two adjacent points; the sound-crossing time is infinite");
  // (a relative 1e-12 below 4/3 is rounding in the averages of a Gamma1 = 4/3 table)
  if (d.gamma1_pressure_weighted < four_thirds * (1.0 - 1e-12))
    warn(d, "gamma1_mean_below_4_3",
         "pressure-weighted <Gamma1> = " + detail::sig(d.gamma1_pressure_weighted, 7) +
             " < 4/3: sufficient for dynamical instability");
  if (d.compactness > options.compactness_warn)
    warn(d, "compactness_high",
         "compactness 2GM/(Rc^2) = " + num(d.compactness) + " > " +
             num(options.compactness_warn) +
             ": the first post-Newtonian criterion is unreliable; a general-relativistic "
             "analysis is needed");
  return d;
}

void write_warnings_json(JsonWriter& json, const std::vector<DiagnosticWarning>& warnings) {
  json.key("warnings").begin_array();
  for (const auto& w : warnings) {
    json.begin_object();
    json.field("code", w.code);
    json.field("message", w.message);
    json.end_object();
  }
  json.end_array();
}

void write_diagnostics_json(JsonWriter& j, const ModelDiagnostics& d) {
  j.field("points", d.points);
  j.field("mass_g", d.mass_g);
  j.field("mass_msun", d.mass_g / constants::M_sun);
  j.field("radius_cm", d.radius_cm);
  j.field("radius_rsun", d.radius_cm / constants::R_sun);
  j.field("mean_density_g_cm3", d.mean_density_g_cm3);
  j.field("rho_c_g_cm3", d.rho_c_g_cm3);
  j.field("rho_c_over_mean", d.rho_c_over_mean);
  j.field("has_centre", d.has_centre);
  j.field("surface_pressure_dyn_cm2", d.surface_pressure);
  j.field("t_dyn_s", d.t_dyn_s);
  j.field("t_kepler_s", d.t_kepler_s);
  j.field("t_freefall_s", d.t_freefall_s);
  j.field("t_sound_s", d.t_sound_s);
  j.field("hse_residual_max", d.hse_residual_max);
  j.key("hse_worst").begin_object();
  j.field("r_cm", d.hse_worst_r_cm);
  j.field("r_over_R", d.hse_worst_r_cm / d.radius_cm);
  j.field("m_over_M", d.hse_worst_m_g / d.mass_g);
  j.field("line", d.hse_worst_line);
  j.field("point", d.hse_worst_index + 1);
  j.field("points_checked", d.hse_points_checked);
  j.field("points_skipped", d.hse_points_skipped);
  j.end_object();
  j.field("mass_integral_g", d.mass_integral_g);
  j.field("mass_consistency", d.mass_consistency);
  j.field("gamma1_pressure_weighted", d.gamma1_pressure_weighted);
  j.field("gamma1_min", d.gamma1_min);
  j.field("gamma1_min_r_cm", d.gamma1_min_r_cm);
  j.key("gamma1_below_4_3_zones").begin_array();
  for (const auto& z : d.gamma1_below_4_3_zones) {
    j.begin_object();
    j.field("r_inner_cm", z.r_inner_cm);
    j.field("r_outer_cm", z.r_outer_cm);
    j.field("r_inner_over_R", z.r_inner_cm / d.radius_cm);
    j.field("r_outer_over_R", z.r_outer_cm / d.radius_cm);
    j.field("m_inner_g", z.m_inner_g);
    j.field("m_outer_g", z.m_outer_g);
    j.field("m_inner_over_M", z.m_inner_g / d.mass_g);
    j.field("m_outer_over_M", z.m_outer_g / d.mass_g);
    j.field("gamma1_min", z.gamma1_min);
    j.field("first_line", z.first_line);
    j.field("last_line", z.last_line);
    j.end_object();
  }
  j.end_array();
  j.field("sigma2_homologous", d.sigma2_homologous);
  j.field("omega2_homologous_s2", d.omega2_homologous);
  j.field("compactness", d.compactness);
  j.field("binding_a", d.binding_a);
  j.field("pn_coefficient", d.pn_coefficient);
  j.field("pn_internal_energy", pn_energy_name(d.pn_energy));
  j.field("pn_coefficient_radiation_limit", d.pn_coefficient_radiation_limit);
  j.field("pn_coefficient_model_energy", d.pn_coefficient_model_energy);
  j.field("gamma1_critical_pn", d.gamma1_critical_pn);
  j.field("pn_unstable", d.pn_unstable);
}

void write_diagnostics_text(std::ostream& out, const ModelDiagnostics& d) {
  using detail::sig;
  const double R = d.radius_cm, M = d.mass_g;
  auto line = [&](const char* label, const std::string& value) {
    std::string l = "  ";
    l += label;
    if (l.size() < 38) l.append(38 - l.size(), ' ');
    out << l << value << "\n";
  };
  auto time = [](double t) {
    return sig(t) + " s = " + sig(t / constants::hour_s) + " h" +
           (t >= constants::day_s ? " = " + sig(t / constants::day_s) + " d" : std::string());
  };
  out << "Model\n";
  line("points", std::to_string(d.points) + (d.has_centre ? " (centre included)"
                                                          : " (envelope: no point at r = 0)"));
  line("mass M", sig(M, 6) + " g = " + sig(M / constants::M_sun, 6) + " Msun");
  line("radius R", sig(R, 6) + " cm = " + sig(R / constants::R_sun, 6) + " Rsun");
  line("mean density", sig(d.mean_density_g_cm3, 6) + " g cm^-3");
  line(d.has_centre ? "central density" : "innermost density",
       sig(d.rho_c_g_cm3, 6) + " g cm^-3 (rho_c / mean = " + sig(d.rho_c_over_mean, 6) + ")");
  line("surface pressure", sig(d.surface_pressure) + " dyn cm^-2");
  out << "Time scales\n";
  line("dynamical (G rho_mean)^-1/2", time(d.t_dyn_s));
  line("Kepler (R^3/GM)^1/2", time(d.t_kepler_s));
  line("free fall (3pi/32G rho_mean)^1/2", time(d.t_freefall_s));
  line("sound crossing int dr/c_s", time(d.t_sound_s));
  out << "Consistency checks\n";
  if (d.hse_points_checked > 0) {
    std::string where = "worst at r/R = " + sig(d.hse_worst_r_cm / R) + " (m/M = " +
                        sig(d.hse_worst_m_g / M) + ", " +
                        (d.hse_worst_line > 0 ? "line " + std::to_string(d.hse_worst_line)
                                              : "point " + std::to_string(d.hse_worst_index + 1)) +
                        ")";
    line("hydrostatic residual (max)", sig(d.hse_residual_max, 3) + ", " + where);
    line("", std::to_string(d.hse_points_checked) + " interior points checked, " +
                 std::to_string(d.hse_points_skipped) + " skipped");
  } else {
    line("hydrostatic residual (max)", "not checked (no usable interior point)");
  }
  line("mass: m(R) vs int 4pi r^2 rho dr", sig(d.mass_consistency, 3) + " (relative)");
  out << "Gamma1 criterion (homologous)\n";
  line("<Gamma1> pressure-weighted", sig(d.gamma1_pressure_weighted, 7));
  line("minimum Gamma1", sig(d.gamma1_min, 7) + " at r/R = " + sig(d.gamma1_min_r_cm / R));
  if (d.gamma1_below_4_3_zones.empty()) line("zones with Gamma1 < 4/3", "none");
  for (const auto& z : d.gamma1_below_4_3_zones)
    line("zone with Gamma1 < 4/3",
         "r/R " + sig(z.r_inner_cm / R) + " - " + sig(z.r_outer_cm / R) + " (r " +
             sig(z.r_inner_cm) + " - " + sig(z.r_outer_cm) + " cm), m/M " +
             sig(z.m_inner_g / M) + " - " + sig(z.m_outer_g / M) + ", min Gamma1 " +
             sig(z.gamma1_min, 5));
  line("sigma_hom^2 = w_hom^2 R^3/(GM)", sig(d.sigma2_homologous, 6) + " (w_hom^2 = " +
                                                sig(d.omega2_homologous) + " s^-2)");
  out << "Relativity (first post-Newtonian)\n";
  line("compactness 2GM/(Rc^2)", sig(d.compactness));
  line("structure coefficient K",
       sig(d.pn_coefficient, 5) + (d.pn_energy == PnEnergy::model
                                       ? " (model internal energy)"
                                       : " (u = 3P/rho; with the model's u: " +
                                             sig(d.pn_coefficient_model_energy, 5) + ")"));
  line("critical Gamma1 4/3 + K 2GM/(Rc^2)", sig(d.gamma1_critical_pn, 8));
  if (d.warnings.empty()) {
    out << "Warnings: none\n";
  } else {
    out << "Warnings (" << d.warnings.size() << ")\n";
    for (const auto& w : d.warnings) out << "  WARNING [" << w.code << "] " << w.message << "\n";
  }
}

} // namespace radmode
