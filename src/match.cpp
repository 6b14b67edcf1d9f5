// Observations, mode identification and homology fit (see include/radmode/match.hpp).
#include "radmode/match.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <cmath>
#include <cstdlib>
#include <fstream>
#include <limits>
#include <numeric>
#include <sstream>

namespace radmode {

namespace {

constexpr double inf = std::numeric_limits<double>::infinity();

std::string trim(const std::string& s) {
  std::size_t a = 0, b = s.size();
  while (a < b && std::isspace(static_cast<unsigned char>(s[a]))) ++a;
  while (b > a && std::isspace(static_cast<unsigned char>(s[b - 1]))) --b;
  return s.substr(a, b - a);
}

enum class NumberParse { ok, not_a_number, not_finite };

/// Whole-token number parse; `used` (if given) allows a trailing non-numeric rest.
NumberParse parse_number(const std::string& token, double& out, std::size_t* used = nullptr) {
  if (token.empty()) return NumberParse::not_a_number;
  const char* begin = token.c_str();
  char* end = nullptr;
  errno = 0;
  const double v = std::strtod(begin, &end);
  if (end == begin) return NumberParse::not_a_number;
  const auto n = static_cast<std::size_t>(end - begin);
  if (used == nullptr && n != token.size()) return NumberParse::not_a_number;
  if (used != nullptr) *used = n;
  if (!std::isfinite(v)) return NumberParse::not_finite;
  out = v;
  return NumberParse::ok;
}

std::string units_expected() { return "one of d, h, min, s, uHz, c/d"; }

} // namespace

// ---- units and labels ----------------------------------------------------------------------

std::optional<ObservedUnit> parse_observed_unit(const std::string& token) {
  if (token == "d") return ObservedUnit::day;
  if (token == "h") return ObservedUnit::hour;
  if (token == "min") return ObservedUnit::minute;
  if (token == "s") return ObservedUnit::second;
  if (token == "uHz" || token == "\xC2\xB5Hz" || token == "\xCE\xBCHz") // u, micro sign, mu
    return ObservedUnit::micro_hertz;
  if (token == "c/d" || token == "cd") return ObservedUnit::cycles_per_day;
  return std::nullopt;
}

const char* unit_token(ObservedUnit unit) {
  switch (unit) {
  case ObservedUnit::day: return "d";
  case ObservedUnit::hour: return "h";
  case ObservedUnit::minute: return "min";
  case ObservedUnit::second: return "s";
  case ObservedUnit::micro_hertz: return "uHz";
  case ObservedUnit::cycles_per_day: return "c/d";
  }
  return "?";
}

bool is_frequency_unit(ObservedUnit unit) {
  return unit == ObservedUnit::micro_hertz || unit == ObservedUnit::cycles_per_day;
}

PeriodDays to_period_days(double value, double sigma, ObservedUnit unit) {
  using constants::day_s;
  using constants::hour_s;
  switch (unit) {
  case ObservedUnit::day: return {value, sigma};
  case ObservedUnit::hour: return {value * hour_s / day_s, sigma * hour_s / day_s};
  case ObservedUnit::minute: return {value * 60.0 / day_s, sigma * 60.0 / day_s};
  case ObservedUnit::second: return {value / day_s, sigma / day_s};
  case ObservedUnit::micro_hertz:
  case ObservedUnit::cycles_per_day: {
    // nu in cycles per day; P = 1/nu, sigma_P = sigma_nu / nu^2 = (sigma_v / v) P.
    const double to_cpd = unit == ObservedUnit::micro_hertz ? 1e-6 * day_s : 1.0;
    const double period = 1.0 / (value * to_cpd);
    return {period, sigma / value * period};
  }
  }
  return {value, sigma};
}

std::optional<int> parse_order_label(const std::string& token) {
  if (token == "F" || token == "f") return 0;
  if (token.size() < 2) return std::nullopt;
  const char last = token.back();
  if (last != 'O' && last != 'o') return std::nullopt;
  const std::string digits = token.substr(0, token.size() - 1);
  if (digits.size() > 4 || digits[0] == '0') return std::nullopt;
  for (char c : digits)
    if (!std::isdigit(static_cast<unsigned char>(c))) return std::nullopt;
  return std::stoi(digits);
}

// ---- observations --------------------------------------------------------------------------

namespace {

const char* const line_syntax = "expected 'value unit uncertainty [label]'";

Location field_location(const std::string& source, std::size_t line, std::size_t field,
                        const char* name) {
  return Location{source, line, field, name};
}

double parse_field(const std::string& token, const std::string& source, std::size_t line,
                   std::size_t field, const char* name) {
  double v = 0;
  switch (parse_number(token, v)) {
  case NumberParse::ok: break;
  case NumberParse::not_a_number:
    throw InputError(ErrorKind::bad_number, field_location(source, line, field, name),
                     "expected a number, found '" + token + "'");
  case NumberParse::not_finite:
    throw InputError(ErrorKind::not_finite, field_location(source, line, field, name),
                     "expected a finite number, found '" + token + "'");
  }
  return v;
}

void finish_observation(Observation& o) {
  const PeriodDays p = to_period_days(o.value, o.uncertainty, o.unit);
  o.period_d = p.period_d;
  o.sigma_d = p.sigma_d;
}

} // namespace

ObservationSet parse_observations(const std::string& text, const std::string& source) {
  ObservationSet set;
  set.source = source;
  std::istringstream in(text);
  std::string raw;
  std::size_t line = 0;
  while (std::getline(in, raw)) {
    ++line;
    std::string content = raw;
    const auto hash = content.find('#');
    if (hash != std::string::npos) {
      const std::string comment = trim(content.substr(hash + 1));
      content = content.substr(0, hash);
      const auto eq = comment.find('=');
      if (trim(content).empty() && eq != std::string::npos && trim(comment.substr(0, eq)) == "star")
        set.star = trim(comment.substr(eq + 1));
    }
    std::istringstream fields(content);
    std::vector<std::string> tok;
    for (std::string t; fields >> t;) tok.push_back(t);
    if (tok.empty()) continue;
    Location here;
    here.file = source;
    here.line = line;
    if (tok.size() < 3 || tok.size() > 4)
      throw InputError(ErrorKind::bad_format, here,
                       std::string(line_syntax) + " (3 or 4 fields), found " +
                           std::to_string(tok.size()) + " field" + (tok.size() == 1 ? "" : "s"));
    Observation o;
    o.value = parse_field(tok[0], source, line, 1, "value");
    const auto unit = parse_observed_unit(tok[1]);
    if (!unit)
      throw InputError(ErrorKind::bad_format, field_location(source, line, 2, "unit"),
                       "expected a unit (" + units_expected() + "), found '" + tok[1] + "'");
    o.unit = *unit;
    o.uncertainty = parse_field(tok[2], source, line, 3, "uncertainty");
    if (!(o.value > 0))
      throw InputError(ErrorKind::bad_format, field_location(source, line, 1, "value"),
                       "expected a positive period or frequency, found " + tok[0]);
    if (!(o.uncertainty > 0))
      throw InputError(ErrorKind::bad_format, field_location(source, line, 3, "uncertainty"),
                       "expected a positive uncertainty, found " + tok[2]);
    if (tok.size() == 4) {
      o.label = parse_order_label(tok[3]);
      if (!o.label)
        throw InputError(ErrorKind::bad_format, field_location(source, line, 4, "label"),
                         "expected a mode label (F, 1O, 2O, ...), found '" + tok[3] + "'");
    }
    o.origin = source + ":" + std::to_string(line);
    finish_observation(o);
    set.items.push_back(o);
  }
  validate_observations(set);
  return set;
}

ObservationSet read_observations(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw Error(ErrorKind::io, path + ": cannot open the observation file for reading");
  std::ostringstream buffer;
  buffer << in.rdbuf();
  if (in.bad()) throw Error(ErrorKind::io, path + ": error while reading the observation file");
  return parse_observations(buffer.str(), path);
}

Observation parse_observation_spec(const std::string& spec, const std::string& origin) {
  const std::string expected =
      "expected VALUE UNIT +- SIGMA [:LABEL], e.g. 0.5421d+-0.0001:F or 21.35uHz+-0.02 "
      "(units " + units_expected() + ")";
  auto fail = [&](const std::string& what) -> UsageError {
    return UsageError(origin + " '" + spec + "': " + what + "; " + expected);
  };
  const auto pm = spec.find("+-");
  if (pm == std::string::npos) throw fail("no '+-' before the uncertainty");
  const std::string left = trim(spec.substr(0, pm));
  std::string right = trim(spec.substr(pm + 2));
  std::string label_text;
  const auto colon = right.find(':');
  if (colon != std::string::npos) {
    label_text = trim(right.substr(colon + 1));
    right = trim(right.substr(0, colon));
  }
  Observation o;
  std::size_t used = 0;
  if (parse_number(left, o.value, &used) != NumberParse::ok) throw fail("the value is not a number");
  const auto unit = parse_observed_unit(trim(left.substr(used)));
  if (!unit) throw fail("unknown unit '" + trim(left.substr(used)) + "'");
  o.unit = *unit;
  if (parse_number(right, o.uncertainty, &used) != NumberParse::ok)
    throw fail("the uncertainty is not a number");
  const std::string sigma_unit = trim(right.substr(used));
  if (!sigma_unit.empty() && parse_observed_unit(sigma_unit) != o.unit)
    throw fail("the uncertainty must be in the value's unit (" + std::string(unit_token(o.unit)) +
               ")");
  if (!(o.value > 0)) throw fail("the value must be positive");
  if (!(o.uncertainty > 0)) throw fail("the uncertainty must be positive");
  if (colon != std::string::npos) {
    o.label = parse_order_label(label_text);
    if (!o.label) throw fail("unknown mode label '" + label_text + "' (F, 1O, 2O, ...)");
  }
  o.origin = origin;
  finish_observation(o);
  return o;
}

void validate_observations(const ObservationSet& set) {
  Location file;
  file.file = set.source;
  if (set.items.empty())
    throw InputError(ErrorKind::bad_format, file,
                     "expected at least one observed periodicity ('value unit uncertainty "
                     "[label]'), found none");
  for (std::size_t a = 0; a < set.items.size(); ++a)
    for (std::size_t b = a + 1; b < set.items.size(); ++b) {
      const auto& oa = set.items[a];
      const auto& ob = set.items[b];
      if (!oa.label || !ob.label) continue;
      if (*oa.label == *ob.label)
        throw InputError(ErrorKind::bad_format, file,
                         oa.origin + " and " + ob.origin + " both carry the label " +
                             mode_label(*oa.label) + "; expected one observation per mode");
      const bool a_longer = oa.period_d > ob.period_d;
      const bool b_longer = ob.period_d > oa.period_d;
      if ((a_longer && *oa.label > *ob.label) || (b_longer && *ob.label > *oa.label))
        throw InputError(ErrorKind::bad_format, file,
                         oa.origin + " (" + mode_label(*oa.label) + ") and " + ob.origin + " (" +
                             mode_label(*ob.label) +
                             "): the longer period carries the higher order; expected "
                             "periods to decrease with order");
    }
}

// ---- model periods -------------------------------------------------------------------------

std::vector<ModelPeriod> model_periods(const ModeSet& modes) {
  std::vector<ModelPeriod> out;
  for (const auto& m : modes.modes) {
    ModelPeriod p;
    p.order = m.order;
    if (m.omega2 > 0 && std::isfinite(m.omega2)) {
      const double period_s = 2.0 * constants::pi / std::sqrt(m.omega2);
      p.period_d = period_s / constants::day_s;
      // P = 2 pi / omega  =>  dP/P = 1/2 d(omega^2)/omega^2.
      p.sigma_d = std::isfinite(m.error_estimate) ? 0.5 * std::abs(m.error_estimate) / m.omega2 * p.period_d : inf;
    }
    if (m.order < 0)
      p.why_not = "order not established" + (m.flag.empty() ? std::string() : " (" + m.flag + ")");
    else if (!(m.omega2 > 0))
      p.why_not = "omega^2 <= 0: not an oscillation (dynamically unstable or marginal)";
    else if (!(std::abs(m.error_estimate) < m.omega2))
      p.why_not = "omega^2 within its error estimate of 0: the sign is not established";
    else if (!m.trusted)
      p.why_not = "not trusted" + (m.flag.empty() ? std::string() : ": " + m.flag);
    else if (!std::isfinite(p.sigma_d))
      p.why_not = "no finite error estimate";
    p.usable = p.why_not.empty();
    out.push_back(p);
  }
  std::stable_sort(out.begin(), out.end(),
                   [](const ModelPeriod& a, const ModelPeriod& b) { return a.order < b.order; });
  for (std::size_t i = 1; i < out.size(); ++i)
    if (out[i].order == out[i - 1].order && out[i].order >= 0 && out[i].usable) {
      out[i].usable = false;
      out[i].why_not = "a second mode with the same order";
    }
  return out;
}

std::vector<ModelPeriod> scale_periods(std::vector<ModelPeriod> modes, double scale) {
  for (auto& m : modes) {
    m.period_d *= scale;
    m.sigma_d *= scale;
  }
  return modes;
}

// ---- mode identification -------------------------------------------------------------------

namespace {

std::string mode_name(const ModelPeriod& m) {
  return m.order >= 0 ? mode_label(m.order) : std::string("mode of unknown order");
}

/// Why no assignment exists (called only when the DP finds none).
std::string explain_no_assignment(const ObservationSet& obs, const std::vector<ModelPeriod>& all,
                                  std::size_t usable_count) {
  for (const auto& o : obs.items) {
    if (!o.label) continue;
    auto it = std::find_if(all.begin(), all.end(),
                           [&](const ModelPeriod& m) { return m.order == *o.label; });
    if (it == all.end())
      return o.origin + " is labelled " + mode_label(*o.label) +
             " but that mode was not solved (ask for more modes)";
    if (!it->usable)
      return o.origin + " is labelled " + mode_label(*o.label) + " but that mode is excluded (" +
             it->why_not + ")";
  }
  if (obs.items.size() > usable_count)
    return std::to_string(obs.items.size()) + " observations but only " +
           std::to_string(usable_count) + " usable modes (ask for more modes)";
  return "the labels and the period order leave no mode for some observation (one observation "
         "per mode, longer periods to lower orders)";
}

} // namespace

MatchResult match_modes(const ObservationSet& observations, const std::vector<ModelPeriod>& modes) {
  MatchResult result;
  std::vector<ModelPeriod> cand;
  for (const auto& m : modes) {
    if (m.usable)
      cand.push_back(m);
    else
      result.excluded.push_back(mode_name(m) + ": " + m.why_not);
  }
  std::stable_sort(cand.begin(), cand.end(),
                   [](const ModelPeriod& a, const ModelPeriod& b) { return a.order < b.order; });

  const auto& items = observations.items;
  const std::size_t n = items.size();
  const std::size_t m = cand.size();
  std::vector<std::size_t> by_period(n);
  std::iota(by_period.begin(), by_period.end(), std::size_t{0});
  std::stable_sort(by_period.begin(), by_period.end(), [&](std::size_t a, std::size_t b) {
    return items[a].period_d > items[b].period_d;
  });

  auto cost = [&](std::size_t i, std::size_t j) {
    const Observation& o = items[by_period[i]];
    const ModelPeriod& c = cand[j];
    if (o.label && *o.label != c.order) return inf;
    const double d = o.period_d - c.period_d;
    return d * d / (o.sigma_d * o.sigma_d + c.sigma_d * c.sigma_d);
  };

  // best[i][j]: least chi^2 placing the i longest observations on orders among the j lowest
  // candidates (strictly increasing order with decreasing period). take[i][j]: observation i-1
  // sits on candidate j-1 in that optimum.
  const std::size_t w = m + 1;
  std::vector<double> best((n + 1) * w, inf);
  std::vector<char> take((n + 1) * w, 0);
  for (std::size_t j = 0; j <= m; ++j) best[j] = 0;
  for (std::size_t i = 1; i <= n; ++i)
    for (std::size_t j = 1; j <= m; ++j) {
      const double skip = best[i * w + j - 1];
      const double use = best[(i - 1) * w + j - 1] + cost(i - 1, j - 1);
      if (use < skip) {
        best[i * w + j] = use;
        take[i * w + j] = 1;
      } else {
        best[i * w + j] = skip;
      }
    }

  if (!(best[n * w + m] < inf)) {
    result.status = MatchStatus::no_assignment;
    result.message = explain_no_assignment(observations, modes, m);
    return result;
  }

  result.status = MatchStatus::ok;
  result.chi2 = best[n * w + m];
  result.assignments.resize(n);
  for (std::size_t i = n, j = m; i > 0;) {
    if (take[i * w + j]) {
      const std::size_t k = by_period[i - 1];
      const Observation& o = items[k];
      const ModelPeriod& c = cand[j - 1];
      Assignment a;
      a.observation = k;
      a.order = c.order;
      a.model_period_d = c.period_d;
      a.model_sigma_d = c.sigma_d;
      a.residual_sigma =
          (o.period_d - c.period_d) / std::sqrt(o.sigma_d * o.sigma_d + c.sigma_d * c.sigma_d);
      result.assignments[k] = a;
      --i;
    }
    --j;
  }

  std::vector<Assignment> sorted = result.assignments;
  std::sort(sorted.begin(), sorted.end(),
            [](const Assignment& a, const Assignment& b) { return a.order < b.order; });
  for (std::size_t a = 0; a < sorted.size(); ++a)
    for (std::size_t b = a + 1; b < sorted.size(); ++b) {
      const auto& lo = sorted[a]; // lower order, longer period
      const auto& hi = sorted[b];
      const auto& olo = items[lo.observation];
      const auto& ohi = items[hi.observation];
      RatioComparison r;
      r.order_long = lo.order;
      r.order_short = hi.order;
      r.observation_long = lo.observation;
      r.observation_short = hi.observation;
      r.observed = ohi.period_d / olo.period_d;
      r.observed_sigma = r.observed * std::hypot(ohi.sigma_d / ohi.period_d,
                                                 olo.sigma_d / olo.period_d);
      r.model = hi.model_period_d / lo.model_period_d;
      result.ratios.push_back(r);
    }
  return result;
}

// ---- homology fit --------------------------------------------------------------------------

void FitOptions::validate() const {
  if (max_iterations < 1 || max_iterations > 10000)
    throw UsageError("fit max_iterations = " + std::to_string(max_iterations) +
                     ": expected 1..10000");
}

namespace {

struct ScaleFit {
  double scale = 1;
  double sigma = 0;
};

/// Closed-form scale for a fixed assignment, weights w = sigma_obs^2 + s^2 sigma_ref^2 iterated
/// to self-consistency. `ref` are the unscaled model periods.
ScaleFit scale_for(const ObservationSet& obs, const std::vector<Assignment>& assign,
                   const std::vector<ModelPeriod>& ref, double s) {
  auto find_ref = [&](int order) -> const ModelPeriod& {
    return *std::find_if(ref.begin(), ref.end(),
                         [&](const ModelPeriod& m) { return m.usable && m.order == order; });
  };
  double sum_pp = 0;
  for (int it = 0; it < 200; ++it) {
    double sum_op = 0;
    sum_pp = 0;
    for (const auto& a : assign) {
      const auto& o = obs.items[a.observation];
      const auto& m = find_ref(a.order);
      const double wgt = o.sigma_d * o.sigma_d + s * s * m.sigma_d * m.sigma_d;
      sum_op += o.period_d * m.period_d / wgt;
      sum_pp += m.period_d * m.period_d / wgt;
    }
    const double next = sum_op / sum_pp;
    const bool done = std::abs(next - s) <= 1e-14 * s;
    s = next;
    if (done) break;
  }
  return {s, 1.0 / std::sqrt(sum_pp)};
}

bool same_orders(const std::vector<Assignment>& a, const std::vector<Assignment>& b) {
  if (a.size() != b.size()) return false;
  for (std::size_t i = 0; i < a.size(); ++i)
    if (a[i].order != b[i].order) return false;
  return true;
}

} // namespace

HomologyFit fit_homology(const ObservationSet& observations, const std::vector<ModelPeriod>& modes,
                         double mass_g, double radius_cm, const FitOptions& options) {
  options.validate();
  HomologyFit fit;
  fit.radius_ref_cm = radius_cm;
  fit.rho_mean_ref = 3.0 * mass_g / (4.0 * constants::pi * radius_cm * radius_cm * radius_cm);

  const auto& items = observations.items;
  std::size_t longest = 0;
  for (std::size_t i = 1; i < items.size(); ++i)
    if (items[i].period_d > items[longest].period_d) longest = i;

  std::vector<ModelPeriod> starts = modes;
  std::stable_sort(starts.begin(), starts.end(),
                   [](const ModelPeriod& a, const ModelPeriod& b) { return a.order < b.order; });
  bool have = false;
  int tried = 0;
  for (const auto& start : starts) {
    if (!start.usable) continue;
    if (items[longest].label && *items[longest].label != start.order) continue;
    ++tried;
    double s = items[longest].period_d / start.period_d;
    MatchResult current = match_modes(observations, scale_periods(modes, s));
    int it = 1;
    bool converged = false;
    for (; it <= options.max_iterations && current.status == MatchStatus::ok; ++it) {
      s = scale_for(observations, current.assignments, modes, s).scale;
      MatchResult next = match_modes(observations, scale_periods(modes, s));
      const bool stable = next.status == MatchStatus::ok &&
                          same_orders(next.assignments, current.assignments);
      current = std::move(next);
      if (stable) {
        converged = true;
        break;
      }
    }
    if (!converged) continue;
    if (!have || current.chi2 < fit.match.chi2 - 1e-9 * (1.0 + fit.match.chi2)) {
      have = true;
      fit.scale = s;
      fit.scale_sigma = scale_for(observations, current.assignments, modes, s).sigma;
      fit.iterations = it;
      fit.match = std::move(current);
    }
  }

  if (!have) {
    fit.ok = false;
    fit.match = match_modes(observations, modes);
    fit.message = tried == 0 ? "no usable model mode for the longest observed period"
                             : "the assignment and the scale did not settle from any start";
    if (fit.match.status != MatchStatus::ok) fit.message += "; " + fit.match.message;
    return fit;
  }
  fit.ok = true;
  const double s = fit.scale;
  fit.radius_cm = radius_cm * std::cbrt(s * s);
  fit.radius_sigma_cm = 2.0 / 3.0 * fit.radius_cm * fit.scale_sigma / s;
  fit.rho_mean = fit.rho_mean_ref / (s * s);
  fit.rho_mean_sigma = 2.0 * fit.rho_mean * fit.scale_sigma / s;
  if (items.size() == 1)
    fit.message = "one observation: the scale reproduces it exactly (chi^2 = 0) for any order; "
                  "the order is its label or the lowest usable one";
  return fit;
}

} // namespace radmode
