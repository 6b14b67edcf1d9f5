#include "radmode/diagnostics.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "text_format.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

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

/// Index of the nearest point before i whose x differs from x[i] (or npos).
constexpr std::size_t npos = static_cast<std::size_t>(-1);
std::size_t distinct_before(const std::vector<double>& x, std::size_t i) {
  for (std::size_t j = i; j-- > 0;)
    if (x[j] != x[i]) return j;
  return npos;
}
std::size_t distinct_after(const std::vector<double>& x, std::size_t i) {
  for (std::size_t j = i + 1; j < x.size(); ++j)
    if (x[j] != x[i]) return j;
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
template <class TooClose, class Resolved>
double residual_form(const std::vector<double>& x, const std::vector<double>& y, std::size_t i,
                     double target, TooClose too_close, bool monotone, Resolved resolved) {
  std::size_t a = distinct_before(x, i), b = distinct_after(x, i);
  if (a == npos || b == npos || !(target < 0.0)) return std::numeric_limits<double>::quiet_NaN();
  bool a_close = false, b_close = false;
  a = widen<true>(a, 0, too_close, monotone, a_close);
  if (a_close) return std::numeric_limits<double>::quiet_NaN();
  b = widen<false>(b, y.size() - 1, too_close, monotone, b_close);
  if (b_close || x[a] == x[i] || x[b] == x[i] || !resolved(a, b))
    return std::numeric_limits<double>::quiet_NaN();
  const double d = derivative3(x[a], x[i], x[b], y[a], y[i], y[b]);
  return std::abs(d - target) / std::abs(target);
}

/// b G^2 M^3 / R^2 [g cm^4 s^-4] of physics.md section 5, for two choices of the specific
/// internal energy u [erg g^-1] at each point (ua, ub) in one pass; trapezoid in m on the m
/// column. Per point, computed once: gm_r = G m / r, g_r = G / r (both 0 at r = 0) and
/// p_rho = P / rho.
struct PnIntegrals {
  double a = 0, b = 0;
};
PnIntegrals pn_integrals(const StellarModel& model, const std::vector<double>& ua,
                         const std::vector<double>& ub, const std::vector<double>& gm_r,
                         const std::vector<double>& g_r, const std::vector<double>& p_rho) {
  const std::size_t n = model.size();
  double Ua = 0, Ub = 0, Omega = 0;
  double prev_fa = 0, prev_fb = 0;
  PnIntegrals total;
  for (std::size_t i = 0; i < n; ++i) {
    double dm = 0;
    if (i > 0) {
      dm = model.m[i] - model.m[i - 1];
      Ua += 0.5 * (ua[i] + ua[i - 1]) * dm;
      Ub += 0.5 * (ub[i] + ub[i - 1]) * dm;
      Omega += 0.5 * (gm_r[i] + gm_r[i - 1]) * dm;
    }
    const double gr = gm_r[i];
    const bool inside = model.r[i] > 0.0;
    const double fa =
        (inside ? g_r[i] * (Ua - Omega) : 0.0) + 0.5 * gr * gr + gr * (ua[i] + p_rho[i]);
    const double fb =
        (inside ? g_r[i] * (Ub - Omega) : 0.0) + 0.5 * gr * gr + gr * (ub[i] + p_rho[i]);
    if (i > 0) {
      total.a += 0.5 * (fa + prev_fa) * dm;
      total.b += 0.5 * (fb + prev_fb) * dm;
    }
    prev_fa = fa;
    prev_fb = fb;
  }
  return total;
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
  const auto& r = model.r;
  const auto& m = model.m;
  const auto& P = model.P;
  const auto& rho = model.rho;
  const auto& g1 = model.gamma1;
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

  // Per-point quantities, each in a loop of its own without branches, so that the compiler
  // can vectorize the divisions; every value is the same expression as before, bit for bit.
  // P / rho [erg g^-1] is taken as 0 at a zero-pressure surface point where rho = 0 too (the
  // limit for a polytrope, where P/rho is proportional to theta).
  std::vector<double> p_rho(n), c_s(n), work(n);
  for (std::size_t i = 0; i < n; ++i) {
    const double q = P[i] / rho[i]; // 0/0 at such a surface point: replaced by 0
    p_rho[i] = P[i] == 0.0 ? 0.0 : q;
  }
  for (std::size_t i = 0; i < n; ++i) c_s[i] = std::sqrt(g1[i] * p_rho[i]);

  // Time scales.
  d.t_dyn_s = 1.0 / std::sqrt(G * d.mean_density_g_cm3);
  d.t_kepler_s = std::sqrt(R * R * R / (G * M));
  d.t_freefall_s = std::sqrt(3.0 * pi / (32.0 * G * d.mean_density_g_cm3));
  {
    std::vector<double>& cell = work; // 2 dr / (c_i-1 + c_i) of cell i
    for (std::size_t i = 1; i < n; ++i) cell[i] = 2.0 * (r[i] - r[i - 1]) / (c_s[i - 1] + c_s[i]);
    double t = 0;
    for (std::size_t i = 1; i < n; ++i) {
      if (r[i] - r[i - 1] == 0.0) continue;
      if (c_s[i - 1] + c_s[i] == 0.0) {
        t = std::numeric_limits<double>::infinity();
        break;
      }
      t += cell[i];
    }
    d.t_sound_s = t;
  }

  // One pass for the extremes and the monotonicity of P and m.
  std::size_t g1_min_index = 0;
  double p_max = P[0];
  bool g1_above_1 = true;
  // With P non-increasing and m non-decreasing along the table, "not resolved" in the HSE
  // check holds on a contiguous run next to each point (stencil ends found by bisection).
  bool p_monotone = true, m_monotone = true;
  for (std::size_t i = 0; i < n; ++i) {
    if (g1[i] < g1[g1_min_index]) g1_min_index = i; // the first minimum, as std::min_element
    if (P[i] > p_max) p_max = P[i];
    g1_above_1 = g1_above_1 && g1[i] > 1.0;
    if (i > 0) {
      p_monotone = p_monotone && P[i] <= P[i - 1];
      m_monotone = m_monotone && m[i] >= m[i - 1];
    }
  }

  // Integrals in r (trapezoid): mass, pressure moments, inertia of xi = const.
  double mass_int = 0, p_int = 0, g1p_int = 0, excess_int = 0, inertia_int = 0;
  for (std::size_t i = 1; i < n; ++i) {
    const double dr = r[i] - r[i - 1];
    auto trap = [&](auto f) { return 0.5 * dr * (f(i - 1) + f(i)); };
    mass_int += trap([&](std::size_t k) { return 4.0 * pi * r[k] * r[k] * rho[k]; });
    p_int += trap([&](std::size_t k) { return P[k] * r[k] * r[k]; });
    g1p_int += trap([&](std::size_t k) { return g1[k] * P[k] * r[k] * r[k]; });
    excess_int += trap([&](std::size_t k) { return (g1[k] - four_thirds) * P[k] * r[k] * r[k]; });
    inertia_int += trap([&](std::size_t k) { return rho[k] * r[k] * r[k] * r[k] * r[k]; });
  }
  if (!(p_int > 0.0))
    throw Error(ErrorKind::numerical,
                model.source + ": the pressure integral is zero; Gamma1 averages are undefined");

  d.mass_integral_g = mass_int;
  const double dm_table = M - m[0];
  d.mass_consistency = dm_table > 0.0 ? std::abs(dm_table - mass_int) / dm_table
                                      : std::numeric_limits<double>::infinity();

  d.gamma1_pressure_weighted = g1p_int / p_int;
  d.gamma1_min = g1[g1_min_index];
  d.gamma1_min_r_cm = r[g1_min_index];
  find_gamma1_zones(model, d);
  const double inertia = inertia_int + std::pow(R, 6) * d.surface_pressure / (G * M);
  d.omega2_homologous = 9.0 * excess_int / inertia;
  d.sigma2_homologous = d.omega2_homologous * R * R * R / (G * M);

  // Hydrostatic equilibrium residual.
  {
    std::vector<double> s(n); // m^(2/3), the mass-form coordinate
    for (std::size_t i = 0; i < n; ++i) s[i] = std::cbrt(m[i] * m[i]);
    // Exact dP/dr = -G m rho / r^2 and dP/ds = -3 G m^(4/3) / (8 pi r^4) per point (used where
    // r > 0); m^(4/3) = s^2 and r^4 = (r^2)^2, within a few units of round-off of the powers.
    std::vector<double>& g_rho = work;
    std::vector<double> target_s(n);
    for (std::size_t i = 0; i < n; ++i) {
      const double r2 = r[i] * r[i];
      g_rho[i] = G * m[i] * rho[i] / (r[i] * r[i]);
      target_s[i] = -3.0 * G * (s[i] * s[i]) / (8.0 * pi * (r2 * r2));
    }
    const double p_floor = options.hse_pressure_floor * p_max;
    double worst = -1;
    for (std::size_t i = 1; i + 1 < n; ++i) {
      if (!(r[i] > 0.0) || !(m[i] > 0.0) || P[i] < p_floor) {
        ++d.hse_points_skipped;
        continue;
      }
      const double eps = hse_min_relative_change;
      auto p_too_close = [&](std::size_t j) { return std::abs(P[j] - P[i]) < eps * P[i]; };
      // Radius form: only where P changes by less than a factor 2 across the stencil (next to
      // a power-law zero of P the three-point difference has an O(1) error).
      const double by_r = residual_form(r, P, i, -g_rho[i], p_too_close, p_monotone,
                                        [&](std::size_t a, std::size_t b) {
                                          return std::min(P[a], P[b]) >= 0.5 * std::max(P[a], P[b]);
                                        });
      // Mass form: the mass differences must be resolved as well.
      const double by_m = residual_form(
          s, P, i, target_s[i],
          [&](std::size_t j) { return p_too_close(j) || std::abs(m[j] - m[i]) < eps * m[i]; },
          p_monotone && m_monotone, [](std::size_t, std::size_t) { return true; });
      double res;
      if (std::isnan(by_r) && std::isnan(by_m)) {
        ++d.hse_points_skipped;
        continue;
      }
      if (std::isnan(by_r)) res = by_m;
      else if (std::isnan(by_m)) res = by_r;
      else res = std::min(by_r, by_m);
      ++d.hse_points_checked;
      if (res > worst) {
        worst = res;
        d.hse_worst_index = i;
      }
    }
    if (d.hse_points_checked > 0) {
      d.hse_residual_max = worst;
      d.hse_worst_r_cm = r[d.hse_worst_index];
      d.hse_worst_m_g = m[d.hse_worst_index];
      d.hse_worst_line =
          d.hse_worst_index < model.line.size() ? model.line[d.hse_worst_index] : 0;
    }
  }

  // Post-Newtonian coefficient.
  d.compactness = 2.0 * G * M / (R * constants::c_light * constants::c_light);
  {
    std::vector<double> gm_r(n), g_r(n);
    for (std::size_t i = 0; i < n; ++i) {
      const double inverse = G / r[i], mass_term = G * m[i] / r[i]; // r = 0: replaced by 0
      g_r[i] = r[i] > 0.0 ? inverse : 0.0;
      gm_r[i] = r[i] > 0.0 ? mass_term : 0.0;
    }
    double W = 0; // int G m dm / r
    for (std::size_t i = 1; i < n; ++i) W += 0.5 * (gm_r[i] + gm_r[i - 1]) * (m[i] - m[i - 1]);
    d.binding_a = W * R / (G * M * M);
    std::vector<double> u_rad(n), u_model(n);
    d.model_has_u = model.u.size() == n;
    const bool model_u_defined = d.model_has_u || g1_above_1;
    for (std::size_t i = 0; i < n; ++i) u_rad[i] = 3.0 * p_rho[i];
    if (d.model_has_u)
      u_model = model.u;
    else if (model_u_defined)
      for (std::size_t i = 0; i < n; ++i) u_model[i] = p_rho[i] / (g1[i] - 1.0);
    const double scale = G * G * M * M * M / (R * R);
    const PnIntegrals b = pn_integrals(model, u_rad, u_model, gm_r, g_r, p_rho);
    d.pn_coefficient_radiation_limit = b.a / scale / (3.0 * d.binding_a);
    d.pn_coefficient_model_energy = std::numeric_limits<double>::quiet_NaN();
    if (model_u_defined)
      d.pn_coefficient_model_energy = b.b / scale / (3.0 * d.binding_a);
    else if (options.pn_energy == PnEnergy::model)
      throw Error(ErrorKind::numerical,
                  model.source + ": the post-Newtonian coefficient with the model's internal "
                                 "energy needs a u column or Gamma1 > 1 everywhere");
    d.pn_energy = options.pn_energy;
    d.pn_coefficient = options.pn_energy == PnEnergy::model ? d.pn_coefficient_model_energy
                                                           : d.pn_coefficient_radiation_limit;
    d.gamma1_critical_pn = four_thirds + d.pn_coefficient * d.compactness;
    d.pn_unstable = d.gamma1_pressure_weighted < d.gamma1_critical_pn;
  }

  // Warnings.
  if (!d.has_centre)
    warn(d, "no_centre",
         "the model does not reach r = 0 (innermost point at r = " + num(r[0]) +
             " cm, m = " + num(m[0]) + " g); central density, the mass check and the integrals "
             "cover the tabulated part only");
  if (d.hse_points_checked == 0)
    warn(d, "hse_unchecked", "no interior point could be checked for hydrostatic equilibrium");
  else if (d.hse_residual_max > options.hse_warn)
    warn(d, "hse_residual",
         "hydrostatic equilibrium residual " + num(d.hse_residual_max) + " exceeds " +
             num(options.hse_warn) + "; worst at " + where_text(model, d.hse_worst_index));
  if (!(d.mass_consistency <= options.mass_warn))
    warn(d, "mass_inconsistent",
         "m column and integral of 4 pi r^2 rho dr differ by a relative " +
             num(d.mass_consistency) + " (threshold " + num(options.mass_warn) + ")");
  if (!std::isfinite(d.t_sound_s))
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
