#include "radmode/stability.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "text_format.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>

namespace radmode {

namespace {

using detail::sig;
constexpr double four_thirds = 4.0 / 3.0;

/// Range of x holding the share `fraction` of a non-negative weight density g(x) sampled at
/// increasing x (trapezoid), with the matching range of y (interpolated like x).
WeightRange weight_range(const std::vector<double>& x, const std::vector<double>& y,
                         const std::vector<double>& density, double fraction) {
  WeightRange out;
  const std::size_t n = x.size();
  if (n < 2 || y.size() != n || density.size() != n) return out;
  std::vector<double> cum(n, 0.0);
  for (std::size_t i = 1; i < n; ++i)
    cum[i] = cum[i - 1] + 0.5 * (density[i] + density[i - 1]) * (x[i] - x[i - 1]);
  const double total = cum[n - 1];
  if (!(total > 0.0) || !std::isfinite(total)) return out;
  auto at_share = [&](double share, double& xo, double& yo) {
    const double target = share * total;
    const auto it = std::lower_bound(cum.begin(), cum.end(), target);
    std::size_t k = static_cast<std::size_t>(it - cum.begin());
    if (k == 0) {
      xo = x[0];
      yo = y[0];
      return;
    }
    k = std::min(k, n - 1);
    const double span = cum[k] - cum[k - 1];
    const double t = span > 0.0 ? (target - cum[k - 1]) / span : 0.0;
    xo = x[k - 1] + t * (x[k] - x[k - 1]);
    yo = y[k - 1] + t * (y[k] - y[k - 1]);
  };
  out.defined = true;
  out.fraction = fraction;
  at_share(0.5 * (1.0 - fraction), out.r_lo_over_R, out.m_lo_over_M);
  at_share(0.5 * (1.0 + fraction), out.r_hi_over_R, out.m_hi_over_M);
  const auto peak = std::max_element(density.begin(), density.end());
  out.r_peak_over_R = x[static_cast<std::size_t>(peak - density.begin())];
  return out;
}

std::string zone_text(const Gamma1Zone& z, double R, double M) {
  return "r/R " + sig(z.r_inner_cm / R) + "-" + sig(z.r_outer_cm / R) + ", m/M " +
         sig(z.m_inner_g / M) + "-" + sig(z.m_outer_g / M) + ", min Gamma1 " + sig(z.gamma1_min);
}

} // namespace

const char* verdict_name(Verdict v) noexcept {
  switch (v) {
  case Verdict::stable: return "stable";
  case Verdict::unstable: return "unstable";
  case Verdict::marginal: return "marginal";
  case Verdict::undetermined: break;
  }
  return "undetermined";
}

void StabilityOptions::validate() const {
  if (!(marginal_sigma2 >= 0.0 && marginal_sigma2 < 1.0))
    throw UsageError("stability option marginal_sigma2 = " + sig(marginal_sigma2) +
                     ": expected a number in [0, 1)");
  if (!(error_margin >= 1.0 && error_margin <= 100.0))
    throw UsageError("stability option error_margin = " + sig(error_margin) +
                     ": expected a number in [1, 100]");
  if (!(weight_fraction > 0.0 && weight_fraction < 1.0))
    throw UsageError("stability option weight_fraction = " + sig(weight_fraction) +
                     ": expected a number in (0, 1)");
}

StabilityVerdict assess_stability(const ModelDiagnostics& d, const ModeReport& report,
                                  const StabilityOptions& options) {
  options.validate();
  StabilityVerdict v;
  v.t_dyn_s = d.t_dyn_s;
  v.gamma1_pressure_weighted = d.gamma1_pressure_weighted;
  v.sigma2_homologous = d.sigma2_homologous;
  v.gamma1_below_4_3_zones = d.gamma1_below_4_3_zones;
  v.mass_g = d.mass_g;
  v.radius_cm = d.radius_cm;
  v.compactness = d.compactness;
  v.pn_coefficient = d.pn_coefficient;
  v.gamma1_critical_pn = d.gamma1_critical_pn;
  const double unit_omega2 = constants::G * d.mass_g / std::pow(d.radius_cm, 3); // G M / R^3

  // Newtonian verdict from the fundamental.
  std::size_t f = report.modes.size();
  for (std::size_t i = 0; i < report.modes.size(); ++i)
    if (report.modes[i].order == 0) {
      f = i;
      break;
    }
  if (f == report.modes.size()) {
    v.newtonian = Verdict::undetermined;
    v.newtonian_reason = "the fundamental mode was not found, so the exact test cannot be made";
    v.notes.push_back("Newtonian verdict undetermined: no mode of order 0 in the solution");
  } else {
    const ModeQuantities& q = report.modes[f];
    v.fundamental_found = true;
    v.omega2_fundamental_s2 = q.omega2_s2;
    v.sigma2_fundamental = q.sigma2;
    v.omega2_error_s2 = q.error_estimate_s2;
    v.fundamental_trusted = q.trusted;
    v.fundamental_flag = q.flag;
    v.marginal_threshold_s2 = std::max(options.error_margin * q.error_estimate_s2,
                                       options.marginal_sigma2 * unit_omega2);
    const std::string value = "omega0^2 = " + sig(q.omega2_s2) + " s^-2 (sigma0^2 = " +
                              sig(q.sigma2) + ")";
    if (std::abs(q.omega2_s2) <= v.marginal_threshold_s2) {
      v.newtonian = Verdict::marginal;
      v.newtonian_reason = value + " is within its margin " + sig(v.marginal_threshold_s2) +
                           " s^-2 of zero: neutrally stable to the accuracy of the solution";
    } else if (q.omega2_s2 < 0.0) {
      v.newtonian = Verdict::unstable;
      v.newtonian_reason = value + " < 0: the fundamental grows exponentially";
    } else {
      v.newtonian = Verdict::stable;
      v.newtonian_reason = value + " > 0: the fundamental oscillates";
    }
    if (!q.trusted)
      v.notes.push_back("the fundamental is not fully trusted by the solver" +
                        (q.flag.empty() ? std::string() : ": " + q.flag));

    // Where the fundamental lives.
    if (f < report.profiles.size()) {
      const ModeProfile& p = report.profiles[f];
      const std::size_t n = p.r_over_R.size();
      if (n >= 2 && p.xi.size() == n && p.m_over_M.size() == n) {
        // Kinetic weight per unit m/M: (r/R)^2 xi^2; integrate over m/M and report r, m.
        std::vector<double> dens(n);
        for (std::size_t i = 0; i < n; ++i) dens[i] = p.r_over_R[i] * p.r_over_R[i] * p.xi[i] * p.xi[i];
        // weight_range integrates over its first argument: here m/M, so its "r" fields hold
        // m/M and its "m" fields r/R; swap them back.
        v.kinetic = weight_range(p.m_over_M, p.r_over_R, dens, options.weight_fraction);
        std::swap(v.kinetic.r_lo_over_R, v.kinetic.m_lo_over_M);
        std::swap(v.kinetic.r_hi_over_R, v.kinetic.m_hi_over_M);
        // Peak per unit radius: rho r^4 xi^2 ~ (dm/dr) r^2 xi^2.
        double best = -1;
        for (std::size_t i = 1; i < n; ++i) {
          const double dr = p.r_over_R[i] - p.r_over_R[i - 1];
          if (!(dr > 0.0)) continue;
          const double per_r = (p.m_over_M[i] - p.m_over_M[i - 1]) / dr * 0.5 * (dens[i] + dens[i - 1]);
          if (per_r > best) {
            best = per_r;
            v.kinetic.r_peak_over_R = 0.5 * (p.r_over_R[i] + p.r_over_R[i - 1]);
          }
        }
      }
      if (n >= 2 && p.weight.size() == n && p.m_over_M.size() == n) {
        std::vector<double> absw(n), neg(n);
        for (std::size_t i = 0; i < n; ++i) {
          absw[i] = std::abs(p.weight[i]);
          neg[i] = p.weight[i] < 0.0 ? -p.weight[i] : 0.0;
        }
        v.work = weight_range(p.r_over_R, p.m_over_M, absw, options.weight_fraction);
        double tot = 0, drive = 0;
        for (std::size_t i = 1; i < n; ++i) {
          const double dx = p.r_over_R[i] - p.r_over_R[i - 1];
          tot += 0.5 * (absw[i] + absw[i - 1]) * dx;
          drive += 0.5 * (neg[i] + neg[i - 1]) * dx;
        }
        v.work_driving_fraction = tot > 0.0 ? drive / tot : 0.0;
      }
    }
  }

  // Every growing mode.
  for (const ModeQuantities& q : report.modes) {
    if (!(q.omega2_s2 < 0.0) || std::abs(q.omega2_s2) <= v.marginal_threshold_s2) continue;
    GrowingMode g;
    g.order = q.order;
    g.label = q.label;
    g.omega2_s2 = q.omega2_s2;
    g.sigma2 = q.sigma2;
    g.growth_rate_s = std::sqrt(-q.omega2_s2);
    g.efolding_time_s = 1.0 / g.growth_rate_s;
    g.efolding_time_t_dyn = g.efolding_time_s / d.t_dyn_s;
    g.trusted = q.trusted;
    v.growing.push_back(g);
  }

  // Post-Newtonian verdict.
  const double excess = d.gamma1_pressure_weighted - four_thirds;
  const double pn_term = d.pn_coefficient * d.compactness;
  const std::string pn_numbers = "<Gamma1> - 4/3 = " + sig(excess) + " vs K 2GM/(Rc^2) = " +
                                 sig(d.pn_coefficient) + " x " + sig(d.compactness) + " = " +
                                 sig(pn_term);
  if (excess < pn_term) {
    v.post_newtonian = Verdict::unstable;
    v.post_newtonian_reason = pn_numbers + ": below the first post-Newtonian threshold";
  } else if (v.newtonian == Verdict::unstable) {
    v.post_newtonian = Verdict::unstable;
    v.post_newtonian_reason = pn_numbers + ": above the threshold, but the model is already "
                                           "unstable in Newtonian gravity";
  } else {
    v.post_newtonian = Verdict::stable;
    v.post_newtonian_reason = pn_numbers + ": above the first post-Newtonian threshold";
  }

  // Consistency of the evidence.
  if (v.fundamental_found) {
    // Rayleigh: sigma0^2 <= sigma_hom^2 (homologous trial function).
    const double slack = v.marginal_threshold_s2 / unit_omega2;
    if (v.sigma2_fundamental > d.sigma2_homologous + slack + 1e-6 * std::abs(d.sigma2_homologous))
      v.notes.push_back("sigma0^2 = " + sig(v.sigma2_fundamental, 6) +
                        " exceeds the homologous upper bound sigma_hom^2 = " +
                        sig(d.sigma2_homologous, 6) + ": check the model and the solution");
    if (excess < -1e-12 && v.newtonian == Verdict::stable)
      v.notes.push_back("<Gamma1> < 4/3 (sufficient for instability) but the fundamental is "
                        "stable: check the model and the solution");
  }
  if (v.newtonian == Verdict::stable && v.post_newtonian == Verdict::unstable)
    v.notes.push_back("stable in Newtonian gravity but unstable at first post-Newtonian order: "
                      "general relativity decides, the Newtonian verdict alone is not enough");
  else if (v.newtonian == Verdict::stable && pn_term > 0.0 && excess < 2.0 * pn_term)
    v.notes.push_back("within a factor 2 of the post-Newtonian threshold (<Gamma1> - 4/3 = " +
                      sig(excess) + ", K 2GM/(Rc^2) = " + sig(pn_term) +
                      "): read the Newtonian verdict together with the post-Newtonian line");
  if (d.compactness > 0.1)
    v.notes.push_back("compactness " + sig(d.compactness) +
                      " is large: the first post-Newtonian criterion is unreliable");
  return v;
}

void write_verdict_json(JsonWriter& j, const StabilityVerdict& v) {
  auto range = [&](const char* name, const WeightRange& w) {
    j.key(name);
    if (!w.defined) {
      j.null();
      return;
    }
    j.begin_object();
    j.field("fraction", w.fraction);
    j.field("r_lo_over_R", w.r_lo_over_R);
    j.field("r_hi_over_R", w.r_hi_over_R);
    j.field("m_lo_over_M", w.m_lo_over_M);
    j.field("m_hi_over_M", w.m_hi_over_M);
    j.field("r_peak_over_R", w.r_peak_over_R);
    j.end_object();
  };
  j.key("verdict").begin_object();
  j.field("newtonian", verdict_name(v.newtonian));
  j.field("newtonian_reason", v.newtonian_reason);
  j.field("post_newtonian", verdict_name(v.post_newtonian));
  j.field("post_newtonian_reason", v.post_newtonian_reason);
  j.field("unstable", v.unstable());
  j.key("fundamental");
  if (!v.fundamental_found) {
    j.null();
  } else {
    j.begin_object();
    j.field("omega2_s2", v.omega2_fundamental_s2);
    j.field("sigma2", v.sigma2_fundamental);
    j.field("omega2_error_s2", v.omega2_error_s2);
    j.field("marginal_threshold_s2", v.marginal_threshold_s2);
    j.field("trusted", v.fundamental_trusted);
    j.field("flag", v.fundamental_flag);
    range("kinetic_energy_range", v.kinetic);
    range("work_range", v.work);
    j.field("work_driving_fraction", v.work_driving_fraction);
    j.end_object();
  }
  j.key("growing_modes").begin_array();
  for (const auto& g : v.growing) {
    j.begin_object();
    j.field("order", g.order);
    j.field("label", g.label);
    j.field("omega2_s2", g.omega2_s2);
    j.field("sigma2", g.sigma2);
    j.field("growth_rate_s", g.growth_rate_s);
    j.field("efolding_time_s", g.efolding_time_s);
    j.field("efolding_time_h", g.efolding_time_s / constants::hour_s);
    j.field("efolding_time_t_dyn", g.efolding_time_t_dyn);
    j.field("trusted", g.trusted);
    j.end_object();
  }
  j.end_array();
  j.key("evidence").begin_object();
  j.field("gamma1_pressure_weighted", v.gamma1_pressure_weighted);
  j.field("sigma2_homologous", v.sigma2_homologous);
  j.field("gamma1_below_4_3_zone_count", v.gamma1_below_4_3_zones.size());
  j.field("compactness", v.compactness);
  j.field("pn_coefficient", v.pn_coefficient);
  j.field("gamma1_critical_pn", v.gamma1_critical_pn);
  j.end_object();
  j.key("notes").begin_array();
  for (const auto& n : v.notes) j.value(n);
  j.end_array();
  j.end_object();
}

void write_verdict_text(std::ostream& out, const StabilityVerdict& v) {
  auto upper = [](Verdict x) {
    std::string s = verdict_name(x);
    for (auto& ch : s) ch = static_cast<char>(std::toupper(static_cast<unsigned char>(ch)));
    return s;
  };
  out << "Dynamical stability (adiabatic; dynamical, not pulsational stability)\n";
  out << "  Newtonian:          " << upper(v.newtonian) << " -- " << v.newtonian_reason << "\n";
  out << "  post-Newtonian:     " << upper(v.post_newtonian) << " -- " << v.post_newtonian_reason
      << "\n";
  if (v.fundamental_found) {
    out << "  fundamental:        omega0^2 = " << sig(v.omega2_fundamental_s2, 6) << " +- "
        << sig(v.omega2_error_s2, 2) << " s^-2, sigma0^2 = " << sig(v.sigma2_fundamental, 6)
        << (v.fundamental_trusted ? "" : "  [NOT TRUSTED]") << "\n";
    if (v.kinetic.defined)
      out << "  kinetic energy:     " << sig(100 * v.kinetic.fraction, 3) << "% within r/R "
          << sig(v.kinetic.r_lo_over_R) << "-" << sig(v.kinetic.r_hi_over_R) << " (m/M "
          << sig(v.kinetic.m_lo_over_M) << "-" << sig(v.kinetic.m_hi_over_M) << "), peak at r/R "
          << sig(v.kinetic.r_peak_over_R) << "\n";
    if (v.work.defined)
      out << "  work integral:      " << sig(100 * v.work.fraction, 3) << "% of |w| within r/R "
          << sig(v.work.r_lo_over_R) << "-" << sig(v.work.r_hi_over_R) << " (m/M "
          << sig(v.work.m_lo_over_M) << "-" << sig(v.work.m_hi_over_M) << "); "
          << sig(100 * v.work_driving_fraction, 3) << "% of it destabilizing (w < 0)\n";
  }
  for (const auto& g : v.growing)
    out << "  growing mode " << g.label << ":    eta = " << sig(g.growth_rate_s) << " s^-1, e-folding time "
        << sig(g.efolding_time_s) << " s = " << sig(g.efolding_time_s / constants::hour_s)
        << " h = " << sig(g.efolding_time_t_dyn) << " t_dyn" << (g.trusted ? "" : "  [NOT TRUSTED]")
        << "\n";
  out << "  evidence:           <Gamma1> = " << sig(v.gamma1_pressure_weighted, 6)
      << ", sigma_hom^2 = " << sig(v.sigma2_homologous, 6) << " (upper bound of sigma0^2), "
      << v.gamma1_below_4_3_zones.size() << " zone(s) with Gamma1 < 4/3\n";
  for (const auto& z : v.gamma1_below_4_3_zones)
    out << "                      Gamma1 < 4/3 at " << zone_text(z, v.radius_cm, v.mass_g) << "\n";
  out << "  relativity:         2GM/(Rc^2) = " << sig(v.compactness) << ", K = "
      << sig(v.pn_coefficient, 5) << ", critical Gamma1 = 4/3 + K 2GM/(Rc^2) = "
      << sig(v.gamma1_critical_pn, 8) << "\n";
  for (const auto& n : v.notes) out << "  NOTE: " << n << "\n";
}

} // namespace radmode
