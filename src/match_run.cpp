// Match runs over models: per-model evaluation, ranking and the text/JSON reports
// (see include/radmode/match.hpp; the report layout is documented in docs/match.md).
#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/json.hpp"
#include "radmode/match.hpp"
#include "radmode/modes.hpp"
#include "radmode/version.hpp"

#include <algorithm>
#include <cmath>
#include <sstream>

namespace radmode {

void MatchOptions::validate() const {
  if (count < 0 || count > 200)
    throw UsageError("--count " + std::to_string(count) + ": expected 1..200 (or 0 for automatic)");
  if (top < 0) throw UsageError("--top " + std::to_string(top) + ": expected 0 (all) or more");
  SolveOptions s = solve;
  s.count = count > 0 ? count : 1;
  s.validate();
  fit.validate();
}

int auto_mode_count(const ObservationSet& observations) {
  int need = static_cast<int>(observations.items.size());
  for (const auto& o : observations.items)
    if (o.label) need = std::max(need, *o.label + 1);
  return need + 3;
}

MatchRow evaluate_match(const StellarModel& model, const ObservationSet& observations,
                        const MatchOptions& options) {
  options.validate();
  MatchRow row;
  row.file = model.source;
  const ModelScales scales = model_scales(model);
  row.mass_g = scales.mass_g;
  row.radius_cm = scales.radius_cm;
  row.rho_mean = scales.mean_density;

  SolveOptions solve = options.solve;
  solve.count = options.count > 0 ? options.count : auto_mode_count(observations);
  const ModeSet set = solve_modes(model, solve);
  if (set.status == SolveStatus::not_converged) {
    row.status = "not_converged";
    row.message = "eigensolver did not converge" + (set.message.empty() ? "" : ": " + set.message);
    return row;
  }
  std::vector<std::string> notes;
  if (set.status == SolveStatus::fewer_modes)
    notes.push_back("fewer modes than asked" + (set.message.empty() ? "" : ": " + set.message));
  row.periods = model_periods(set);

  if (options.fit_radius) {
    HomologyFit fit = fit_homology(observations, row.periods, row.mass_g, row.radius_cm, options.fit);
    row.match = fit.match;
    if (!fit.ok) {
      row.status = "fit_failed";
      notes.insert(notes.begin(), fit.message);
    } else if (!fit.message.empty()) {
      notes.push_back(fit.message);
    }
    row.fit = std::move(fit);
  } else {
    row.match = match_modes(observations, row.periods);
  }
  if (row.ok() && row.match.status != MatchStatus::ok) {
    row.status = "no_assignment";
    notes.insert(notes.begin(), row.match.message);
  }
  for (const auto& n : notes) row.message += (row.message.empty() ? "" : "; ") + n;
  return row;
}

std::vector<MatchRow> rank_rows(std::vector<MatchRow> rows, int top) {
  std::vector<MatchRow> good, bad;
  for (auto& r : rows) (r.ok() ? good : bad).push_back(std::move(r));
  // chi^2 compared to 9 significant digits, so that models equal but for round-off (e.g. the
  // same structure at several radii after --fit-radius) keep their input order.
  auto key = [](double chi2) {
    std::ostringstream s;
    s.precision(9);
    s << chi2;
    return std::stod(s.str());
  };
  std::stable_sort(good.begin(), good.end(), [&](const MatchRow& a, const MatchRow& b) {
    const double ka = key(a.chi2()), kb = key(b.chi2());
    if (ka != kb) return ka < kb;
    return a.index < b.index;
  });
  std::stable_sort(bad.begin(), bad.end(),
                   [](const MatchRow& a, const MatchRow& b) { return a.index < b.index; });
  if (top > 0 && good.size() > static_cast<std::size_t>(top))
    good.resize(static_cast<std::size_t>(top));
  for (auto& r : bad) good.push_back(std::move(r));
  return good;
}

// ---- JSON ----------------------------------------------------------------------------------

namespace {

void write_label_or_null(JsonWriter& j, const std::optional<int>& label) {
  if (label)
    j.value(mode_label(*label));
  else
    j.null();
}

void write_observed(JsonWriter& j, const ObservationSet& obs) {
  j.begin_object();
  j.field("star", obs.star);
  j.field("source", obs.source);
  j.key("items").begin_array();
  for (std::size_t i = 0; i < obs.items.size(); ++i) {
    const auto& o = obs.items[i];
    j.begin_object();
    j.field("number", i + 1);
    j.field("origin", o.origin);
    j.field("value", o.value);
    j.field("unit", unit_token(o.unit));
    j.field("uncertainty", o.uncertainty);
    j.field("period_d", o.period_d);
    j.field("sigma_d", o.sigma_d);
    j.key("label");
    write_label_or_null(j, o.label);
    j.end_object();
  }
  j.end_array();
  j.end_object();
}

void write_fit(JsonWriter& j, const HomologyFit& f) {
  j.begin_object();
  j.field("ok", f.ok);
  j.field("note", f.message);
  j.field("period_scale", f.scale);
  j.field("period_scale_sigma", f.scale_sigma);
  j.field("radius_ref_rsun", f.radius_ref_cm / constants::R_sun);
  j.field("radius_rsun", f.radius_cm / constants::R_sun);
  j.field("radius_sigma_rsun", f.radius_sigma_cm / constants::R_sun);
  j.field("rho_mean_ref_g_cm3", f.rho_mean_ref);
  j.field("rho_mean_g_cm3", f.rho_mean);
  j.field("rho_mean_sigma_g_cm3", f.rho_mean_sigma);
  j.field("iterations", f.iterations);
  j.end_object();
}

void write_row(JsonWriter& j, const MatchRow& r, std::size_t rank, const ObservationSet& obs) {
  j.begin_object();
  j.field("rank", rank);
  j.field("model", r.file);
  j.field("index", r.index);
  j.field("chi2", r.chi2());
  j.field("note", r.message);
  j.field("mass_msun", r.mass_g / constants::M_sun);
  j.field("radius_rsun", r.radius_cm / constants::R_sun);
  j.field("rho_mean_g_cm3", r.rho_mean);
  j.key("periods").begin_array();
  for (const auto& p : r.periods) {
    j.begin_object();
    j.field("order", p.order);
    j.field("label", mode_label(p.order));
    if (p.period_d > 0) {
      j.field("period_d", p.period_d);
      j.field("sigma_d", p.sigma_d);
    } else {
      j.key("period_d").null();
      j.key("sigma_d").null();
    }
    j.field("usable", p.usable);
    j.field("why_not", p.why_not);
    j.end_object();
  }
  j.end_array();
  j.key("assignments").begin_array();
  for (const auto& a : r.match.assignments) {
    const auto& o = obs.items[a.observation];
    j.begin_object();
    j.field("observed", a.observation + 1);
    j.field("observed_period_d", o.period_d);
    j.field("observed_sigma_d", o.sigma_d);
    j.key("given_label");
    write_label_or_null(j, o.label);
    j.field("label", mode_label(a.order));
    j.field("order", a.order);
    j.field("model_period_d", a.model_period_d);
    j.field("model_sigma_d", a.model_sigma_d);
    j.field("residual_sigma", a.residual_sigma);
    j.end_object();
  }
  j.end_array();
  j.key("ratios").begin_array();
  for (const auto& q : r.match.ratios) {
    j.begin_object();
    j.field("name", "P" + std::to_string(q.order_short) + "/P" + std::to_string(q.order_long));
    j.field("order_short", q.order_short);
    j.field("order_long", q.order_long);
    j.field("observed", q.observed);
    j.field("observed_sigma", q.observed_sigma);
    j.field("model", q.model);
    j.end_object();
  }
  j.end_array();
  j.key("excluded").begin_array();
  for (const auto& e : r.match.excluded) j.value(e);
  j.end_array();
  j.key("fit");
  if (r.fit)
    write_fit(j, *r.fit);
  else
    j.null();
  j.end_object();
}

} // namespace

std::string format_match_json(const MatchReport& report) {
  std::ostringstream out;
  JsonWriter j(out);
  j.begin_object();
  j.field("program", "radmode match");
  j.field("version", version);
  j.key("settings").begin_object();
  j.field("count", report.options.count);
  j.field("fit_radius", report.options.fit_radius);
  j.field("top", report.options.top);
  j.field("surface", report.options.solve.surface == SurfaceCondition::regular ? "regular"
                                                                                : "fixed-pressure");
  j.field("inner", report.options.solve.inner == InnerCondition::centre ? "centre" : "rigid");
  j.end_object();
  j.key("observed");
  write_observed(j, report.observations);
  j.field("models", report.models);
  j.field("failed", report.failed);
  j.key("ranking").begin_array();
  std::size_t rank = 0;
  for (const auto& r : report.rows)
    if (r.ok()) write_row(j, r, ++rank, report.observations);
  j.end_array();
  j.key("failures").begin_array();
  for (const auto& r : report.rows) {
    if (r.ok()) continue;
    j.begin_object();
    j.field("model", r.file);
    j.field("index", r.index);
    j.field("status", r.status);
    j.field("message", r.message);
    j.end_object();
  }
  j.end_array();
  j.end_object();
  out << '\n';
  return out.str();
}

// ---- text ----------------------------------------------------------------------------------

namespace {

/// x in fixed ('f'), scientific ('e') or general ('g') notation with `digits` digits; `plus`
/// writes the sign of positive numbers too.
std::string num(double x, char style, int digits, bool plus = false) {
  std::ostringstream s;
  if (style == 'f') s << std::fixed;
  if (style == 'e') s << std::scientific;
  if (plus) s << std::showpos;
  s.precision(digits);
  s << x;
  return s.str();
}

std::string pad(std::string s, std::size_t width) {
  if (s.size() < width) s.append(width - s.size(), ' ');
  return s;
}

std::string observed_text(const Observation& o) {
  std::ostringstream s;
  s.precision(10);
  s << o.value << ' ' << unit_token(o.unit) << " +- " << o.uncertainty;
  return s.str();
}

std::string assignment_summary(const MatchRow& r) {
  std::vector<Assignment> a = r.match.assignments;
  std::sort(a.begin(), a.end(), [](const Assignment& x, const Assignment& y) { return x.order < y.order; });
  std::string s;
  for (const auto& x : a)
    s += (s.empty() ? "" : " ") + mode_label(x.order) + "(" + num(x.residual_sigma, 'f', 1, true) + ")";
  return s;
}

void detail(std::ostringstream& out, const MatchRow& r, const ObservationSet& obs) {
  out << "model " << r.file << ": M = " << num(r.mass_g / constants::M_sun, 'g', 4)
      << " Msun, R = " << num(r.radius_cm / constants::R_sun, 'g', 5)
      << " Rsun, mean density " << num(r.rho_mean, 'g', 5) << " g/cm3, chi2 = "
      << num(r.chi2(), 'g', 4) << " (" << obs.items.size() << " observed)\n";
  if (r.fit) {
    const auto& f = *r.fit;
    out << "  homology fit at fixed mass: R = " << num(f.radius_cm / constants::R_sun, 'g', 6)
        << " +- " << num(f.radius_sigma_cm / constants::R_sun, 'g', 2) << " Rsun (model "
        << num(f.radius_ref_cm / constants::R_sun, 'g', 6) << "), mean density "
        << num(f.rho_mean, 'g', 6) << " +- " << num(f.rho_mean_sigma, 'g', 2)
        << " g/cm3, period scale " << num(f.scale, 'f', 6) << " +- " << num(f.scale_sigma, 'g', 2)
        << "\n";
  }
  out << "  #  observed                       P_obs [d]     +-          given  mode  "
         "P_model [d]   +-          residual [sigma]\n";
  for (const auto& a : r.match.assignments) {
    const auto& o = obs.items[a.observation];
    out << "  " << pad(std::to_string(a.observation + 1), 3) << pad(observed_text(o), 31)
        << pad(num(o.period_d, 'f', 7), 14) << pad(num(o.sigma_d, 'e', 2), 12)
        << pad(o.label ? mode_label(*o.label) : "-", 7) << pad(mode_label(a.order), 6)
        << pad(num(a.model_period_d, 'f', 7), 14) << pad(num(a.model_sigma_d, 'e', 2), 12)
        << num(a.residual_sigma, 'f', 2, true) << "\n";
  }
  for (const auto& q : r.match.ratios)
    out << "  P" << q.order_short << "/P" << q.order_long << ": observed "
        << num(q.observed, 'f', 5) << " +- " << num(q.observed_sigma, 'e', 1) << ", model "
        << num(q.model, 'f', 5) << "\n";
  for (const auto& e : r.match.excluded) out << "  not matched: " << e << "\n";
  if (!r.message.empty()) out << "  note: " << r.message << "\n";
}

} // namespace

std::string format_match_text(const MatchReport& report) {
  const auto& obs = report.observations;
  std::ostringstream out;
  out << "radmode match: " << obs.items.size() << " observed periodicit"
      << (obs.items.size() == 1 ? "y" : "ies")
      << (obs.star.empty() ? std::string() : " of " + obs.star) << " (" << obs.source
      << ") against " << report.models << " model" << (report.models == 1 ? "" : "s") << ", "
      << report.options.count << " modes each" << (report.options.fit_radius ? ", radius fitted" : "")
      << "\n\n";
  std::size_t rank = 0;
  const MatchRow* best = nullptr;
  out << "rank  chi2        " << (report.options.fit_radius ? "R_fit [Rsun]  " : "")
      << "model  (assigned modes with residuals in sigma)\n";
  for (const auto& r : report.rows) {
    if (!r.ok()) continue;
    if (!best) best = &r;
    out << pad(std::to_string(++rank), 6) << pad(num(r.chi2(), 'g', 4), 12);
    if (r.fit) out << pad(num(r.fit->radius_cm / constants::R_sun, 'g', 5), 14);
    out << r.file << "  " << assignment_summary(r) << "\n";
  }
  if (rank == 0) out << "(no model could be matched)\n";
  for (const auto& r : report.rows)
    if (!r.ok()) out << "failed  " << r.file << ": " << r.status << ": " << r.message << "\n";
  if (best) {
    out << "\nbest ";
    detail(out, *best, obs);
  }
  return out.str();
}

} // namespace radmode
