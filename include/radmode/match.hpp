#pragma once
// Observed periodicities against model modes: reading observations, identifying modes by a
// minimum-chi^2 assignment, and a homology (radius) fit.
//
// Observations (docs/match.md has the user-facing description). One periodicity per line:
//     value  unit  uncertainty  [label]
// unit one of d, h, min, s (periods) or uHz, c/d (frequencies); the uncertainty is in the same
// unit; the label is a radial order in the trade's notation (F, 1O, 2O, ...). `#` starts a
// comment; blank lines are ignored; a `# star = NAME` comment names the star. On the command
// line the same is written as one token: VALUE UNIT "+-" SIGMA [":" LABEL], e.g.
// "0.5421d+-0.0001:F" or "21.35uHz+-0.02".
//
// Conversion to period in days (first-order propagation of the uncertainty):
//   periods:     P = v * f_unit,          sigma_P = sigma_v * f_unit
//   frequencies: P = 1/(v * f_unit),      sigma_P = sigma_v / v * P   (= sigma_nu / nu^2)
// with f_unit = 1 (d), 1/24 (h), 1/1440 (min), 1/86400 (s); 1e-6 * 86400 (uHz, in c/d);
// 1 (c/d).
//
// Mode identification (match_modes): each observation goes to one radial order k, at most one
// observation per mode; order is preserved (a longer observed period never goes to a higher
// order than a shorter one); a given label fixes the order. Among all such assignments the one
// with least
//   chi^2 = sum_i (P_obs,i - P_k(i))^2 / (sigma_obs,i^2 + sigma_k(i)^2)
// is found exactly by dynamic programming over (observations by decreasing period) x
// (orders ascending), O(N_obs * N_modes). sigma_k is the model period uncertainty from the
// mode's eigenvalue error estimate: since P = 2 pi / omega, dP/P = 1/2 d(omega^2)/omega^2.
// Only modes with omega^2 > 0 (beyond its error estimate) and a trusted solution take
// part; the others are listed in the result as excluded, with the reason.
//
// Homology fit (fit_homology): at fixed mass and structure every period scales as
// P ∝ (R^3/GM)^(1/2), i.e. P = s * P_ref with s = (R/R_ref)^(3/2) = (rho_mean/rho_mean_ref)^(-1/2).
// For a fixed assignment chi^2(s) is minimized in closed form with the weights
// w_i = sigma_obs,i^2 + s^2 sigma_k,i^2 held at the current s (effective-variance iteration):
//   s = sum P_obs P_k / w  /  sum P_k^2 / w,      sigma_s = (sum P_k^2 / w)^(-1/2)
// (sigma_s from the chi^2 curvature, Delta chi^2 = 1). Assignment and scale are iterated until
// the assignment no longer changes, started from every order the longest observation could
// take, and the lowest chi^2 wins. Then R = R_ref s^(2/3), sigma_R = (2/3) R sigma_s / s,
// rho_mean = rho_ref s^-2, sigma_rho = 2 rho_mean sigma_s / s.
#include "radmode/eigensolve.hpp"
#include "radmode/modes.hpp" // mode_label

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

namespace radmode {

/// Unit in which an observed periodicity is given.
enum class ObservedUnit { day, hour, minute, second, micro_hertz, cycles_per_day };

/// Parses a unit token ("d", "h", "min", "s", "uHz" (also "µHz"/"μHz"), "c/d" (also "cd")); nullopt if none.
std::optional<ObservedUnit> parse_observed_unit(const std::string& token);
/// The canonical token of a unit ("d", "uHz", ...).
const char* unit_token(ObservedUnit unit);
/// True for uHz and c/d.
bool is_frequency_unit(ObservedUnit unit);

/// Period in days and its uncertainty, from a value and uncertainty in `unit` (equations above).
/// Requires value > 0 and sigma >= 0 (caller validates).
struct PeriodDays {
  double period_d = 0;
  double sigma_d = 0;
};
PeriodDays to_period_days(double value, double sigma, ObservedUnit unit);

/// Parses "F", "1O", "2O", ... (case-insensitive); nullopt if not a label.
std::optional<int> parse_order_label(const std::string& token);

/// One observed periodicity.
struct Observation {
  double value = 0;        ///< as given, in `unit`
  double uncertainty = 0;  ///< as given, in `unit` (> 0)
  ObservedUnit unit = ObservedUnit::day;
  double period_d = 0;     ///< period [d]
  double sigma_d = 0;      ///< uncertainty of the period [d]
  std::optional<int> label;///< known radial order, if given
  std::string origin;      ///< "file:line" or "--period 2" (for messages and reports)
};

struct ObservationSet {
  std::string star;  ///< from a `# star = NAME` comment, else empty
  std::string source;///< file name or "command line"
  std::vector<Observation> items; ///< in input order
};

/// Reads observations from text; `source` names the file in messages. Malformed lines throw
/// InputError (bad_number for a token that is not a number, bad_format otherwise) naming
/// file, line and what was expected. The set is validated (validate_observations).
ObservationSet parse_observations(const std::string& text, const std::string& source);
/// Reads a file (Error(io) naming the path if it cannot be read), then parse_observations.
ObservationSet read_observations(const std::string& path);
/// One command-line token "VALUE UNIT +- SIGMA [:LABEL]"; `origin` names it in messages
/// (e.g. "--period 2"). Throws UsageError with the expected syntax.
Observation parse_observation_spec(const std::string& spec, const std::string& origin);
/// At least one observation; labels unique; labelled observations in order (longer period =
/// lower order). Throws InputError (bad_format) naming the observations concerned.
void validate_observations(const ObservationSet& set);

/// A model mode as the matcher sees it.
struct ModelPeriod {
  int order = -1;
  double period_d = 0; ///< 2 pi / omega [d]; 0 when not oscillatory
  double sigma_d = 0;  ///< from the eigenvalue error estimate [d]
  bool usable = false; ///< omega^2 > 0 beyond its error estimate and the mode is trusted
  std::string why_not; ///< reason when !usable
};

/// Periods of a solved mode set (any order in, sorted by order out).
std::vector<ModelPeriod> model_periods(const ModeSet& modes);

struct Assignment {
  std::size_t observation = 0; ///< index into ObservationSet::items
  int order = -1;
  double model_period_d = 0;
  double model_sigma_d = 0;
  double residual_sigma = 0;   ///< (P_obs - P_model) / sqrt(sigma_obs^2 + sigma_model^2)
};

/// Ratio of two assigned periods, shorter over longer (e.g. P1/P0), observed and model.
struct RatioComparison {
  int order_short = -1;     ///< numerator order (higher)
  int order_long = -1;      ///< denominator order (lower)
  std::size_t observation_short = 0;
  std::size_t observation_long = 0;
  double observed = 0;
  double observed_sigma = 0;///< first-order propagation of both period uncertainties
  double model = 0;
};

enum class MatchStatus {
  ok,
  no_assignment, ///< no assignment satisfies the constraints (message says why)
};

struct MatchResult {
  MatchStatus status = MatchStatus::no_assignment;
  std::string message;                  ///< why, when status != ok
  double chi2 = 0;                      ///< valid when ok
  std::vector<Assignment> assignments;  ///< one per observation, in input order (when ok)
  std::vector<RatioComparison> ratios;      ///< every assigned pair (when ok)
  std::vector<std::string> excluded;    ///< modes left out of matching and why
};

/// Minimum-chi^2 order-preserving assignment (see above). `modes` need not be sorted.
MatchResult match_modes(const ObservationSet& observations, const std::vector<ModelPeriod>& modes);

/// The modes with every period and period uncertainty multiplied by `scale`.
std::vector<ModelPeriod> scale_periods(std::vector<ModelPeriod> modes, double scale);

struct FitOptions {
  int max_iterations = 100; ///< assignment <-> scale iterations per start (1..10000)
  void validate() const;    ///< throws UsageError naming the option
};

struct HomologyFit {
  bool ok = false;
  std::string message;          ///< why not ok, or a note (e.g. only one observation)
  double scale = 1;             ///< period scale factor s
  double scale_sigma = 0;
  double radius_cm = 0;         ///< fitted R [cm]
  double radius_sigma_cm = 0;
  double radius_ref_cm = 0;     ///< the model's own R [cm]
  double rho_mean = 0;          ///< fitted mean density [g cm^-3]
  double rho_mean_sigma = 0;
  double rho_mean_ref = 0;      ///< the model's own mean density [g cm^-3]
  int iterations = 0;           ///< of the winning start
  MatchResult match;            ///< assignment and chi^2 at the fitted scale
};

/// Homology fit of the radius at fixed mass (equations above). `mass_g`, `radius_cm` are the
/// model's M and R. Numerical failure is reported in the result (ok = false), not thrown.
HomologyFit fit_homology(const ObservationSet& observations, const std::vector<ModelPeriod>& modes,
                         double mass_g, double radius_cm, const FitOptions& options = {});

// ---- one model, many models ---------------------------------------------------------------

/// Settings of a match run (one per `radmode match` invocation).
struct MatchOptions {
  int count = 0;           ///< modes solved per model; 0 = auto_mode_count(observations); 1..200
  bool fit_radius = false; ///< homology fit of R for every model, rank by the fitted chi^2
  int top = 0;             ///< rows of the ranking kept (failed rows always kept); 0 = all
  SolveOptions solve;      ///< count is overridden by `count`
  FitOptions fit;
  void validate() const;   ///< throws UsageError naming the option
};

/// Modes to solve when --count is not given: enough for the highest label and for every
/// observation, plus three spare orders: max(highest label + 1, N_obs) + 3.
int auto_mode_count(const ObservationSet& observations);

/// One model's outcome.
struct MatchRow {
  std::size_t index = 0;     ///< position in the input list
  std::string file;
  std::string status = "ok"; ///< "ok", error_kind_name() of an input error, "not_converged",
                             ///< "no_assignment", "fit_failed" or "internal"
  std::string message;       ///< why not ok; or a note (fewer modes than asked, fit note)
  double mass_g = 0, radius_cm = 0, rho_mean = 0; ///< the model's own (0 when not read)
  std::vector<ModelPeriod> periods; ///< every solved mode, by order (the model's own R)
  MatchResult match;                ///< at the model's R, or at the fitted R with fit_radius
  std::optional<HomologyFit> fit;   ///< with fit_radius
  bool ok() const { return status == "ok"; }
  double chi2() const { return match.chi2; }
};

/// Solves `model` and matches (and fits, with options.fit_radius). Numerical trouble becomes
/// the row's status; throws only for invalid options.
MatchRow evaluate_match(const StellarModel& model, const ObservationSet& observations,
                        const MatchOptions& options);

/// Successful rows by increasing chi^2 (to 9 digits; ties by index), cut to `top`, then the failed
/// rows in input order.
std::vector<MatchRow> rank_rows(std::vector<MatchRow> rows, int top);

/// Everything a report needs.
struct MatchReport {
  ObservationSet observations;
  MatchOptions options;       ///< effective options (count resolved)
  std::size_t models = 0;     ///< models in the run
  std::size_t failed = 0;     ///< rows not ok
  std::vector<MatchRow> rows; ///< as rank_rows returns them
};

/// JSON document (keys documented in docs/match.md): program, version, settings, observed,
/// models, failed, ranking (ok rows best first, each with rank, model, chi2, periods,
/// assignments, ratios, excluded, fit) and failures (rows not ok with status and message).
std::string format_match_json(const MatchReport& report);
/// Plain text for people: the ranking table, then the best model's assignment in detail.
std::string format_match_text(const MatchReport& report);

} // namespace radmode
