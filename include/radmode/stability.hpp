#pragma once
// Dynamical-stability verdict of a model (physics.md section 5), from the exact fundamental
// mode (a solved ModeSet turned into a ModeReport by modes.hpp) together with the model
// diagnostics (diagnostics.hpp) as supporting evidence.
//
// Newtonian verdict (exact test: unstable iff omega0^2 < 0):
//   marginal  when |omega0^2| <= max(error_margin * error estimate of omega0^2,
//                                    marginal_sigma2 * G M / R^3),
//   unstable  when omega0^2 < 0 otherwise,
//   stable    when omega0^2 > 0 otherwise,
//   undetermined when the ModeSet holds no mode of order 0 (solver failure): never guessed.
// An exactly marginal model (Gamma1 = 4/3 gives omega0^2 = 0) comes out of the solver as a
// small number of either sign, of the size of its error estimate: the estimate is an
// asymptotic estimate, not a bound (for Gamma1 = 4/3 polytropes the computed |omega0^2| is
// within 1 % of the estimate on either side), hence error_margin = 2 by default. The floor
// marginal_sigma2 (default 1e-6: growth or oscillation slower than 1000 t_K) covers a solution
// whose error estimate is itself tiny.
//
// Post-Newtonian verdict (Chandrasekhar 1964, first order in G M/(R c^2)):
//   unstable  when <Gamma1> - 4/3 < K * 2GM/(R c^2) (diagnostics.hpp), or when the Newtonian
//             verdict is already unstable (relativity only destabilizes further);
//   stable    otherwise.
// It is a homologous (trial-function) criterion: it can miss instabilities the exact Newtonian
// fundamental finds (a Gamma1 < 4/3 core), hence the second clause.
//
// Growth: for every mode with omega^2 < 0 (beyond the marginal threshold): eta = (-omega^2)^1/2
// [s^-1], tau = 1/eta [s], tau / t_dyn.
//
// Where the fundamental lives (from the mode profile, xi normalized to xi(R) = 1):
//   kinetic-energy weight  dE = rho r^4 xi^2 dr = r^2 xi^2 dm / (4 pi): the radius and mass
//       range [lo, hi] between the cumulative fractions (1 - f)/2 and (1 + f)/2 (f =
//       weight_fraction, default 0.9) and the radius of the largest weight per unit radius;
//   work (stiffness) integrand w(r) of modes.hpp: the same range for |w| dr, and the fraction
//       of int |w| dr where w < 0 (layers that drive the instability).
// Trapezoid rules on the FE nodes; ranges interpolate the cumulative sums linearly.
#include "radmode/diagnostics.hpp"
#include "radmode/json.hpp"
#include "radmode/modes.hpp"

#include <ostream>
#include <string>
#include <vector>

namespace radmode {

/// Cautions that go with every stability verdict (shown in `--help` of inspect and modes).
inline constexpr const char* stability_cautions =
    "Cautions: the analysis is adiabatic, so the verdict concerns dynamical stability "
    "(collapse or expansion on the dynamical time), not pulsational (non-adiabatic) "
    "stability. A Newtonian-stable verdict near the relativistic threshold (<Gamma1> close "
    "to 4/3) must be read together with the post-Newtonian line.";


enum class Verdict { stable, unstable, marginal, undetermined };

/// "stable", "unstable", "marginal", "undetermined".
const char* verdict_name(Verdict v) noexcept;

struct StabilityOptions {
  double marginal_sigma2 = 1e-6; ///< floor of the marginal band in G M / R^3 units, [0, 1)
  double error_margin = 2.0;     ///< band = this times the error estimate of omega0^2, [1, 100]
  double weight_fraction = 0.9;  ///< share of a weight the reported ranges hold, (0, 1)

  /// Throws UsageError naming the option, its value and the allowed range.
  void validate() const;
};

struct GrowingMode {
  int order = -1;
  std::string label;
  double omega2_s2 = 0;          ///< < 0 [s^-2]
  double sigma2 = 0;             ///< omega^2 R^3 / (G M)
  double growth_rate_s = 0;      ///< eta [s^-1]
  double efolding_time_s = 0;    ///< 1 / eta [s]
  double efolding_time_t_dyn = 0;///< (1 / eta) / t_dyn
  bool trusted = false;          ///< from the solver
};

/// Range holding a share of a radial weight.
struct WeightRange {
  bool defined = false;          ///< false when the weight is zero or the profile is missing
  double r_lo_over_R = 0, r_hi_over_R = 0;
  double m_lo_over_M = 0, m_hi_over_M = 0;
  double r_peak_over_R = 0;      ///< largest weight per unit r/R
  double fraction = 0;           ///< the share held (StabilityOptions::weight_fraction)
};

struct StabilityVerdict {
  Verdict newtonian = Verdict::undetermined;
  Verdict post_newtonian = Verdict::undetermined;
  std::string newtonian_reason;     ///< one sentence with the numbers
  std::string post_newtonian_reason;

  // The fundamental (valid when newtonian != undetermined).
  bool fundamental_found = false;
  double omega2_fundamental_s2 = 0;
  double sigma2_fundamental = 0;
  double omega2_error_s2 = 0;       ///< error estimate of omega0^2 [s^-2]
  double marginal_threshold_s2 = 0; ///< max(error_margin error, floor G M/R^3) [s^-2]
  bool fundamental_trusted = false;
  std::string fundamental_flag;     ///< solver's reason when not trusted

  std::vector<GrowingMode> growing; ///< every mode with omega^2 below -marginal_threshold

  WeightRange kinetic;              ///< of the fundamental
  WeightRange work;                 ///< of the fundamental
  double work_driving_fraction = 0; ///< share of int |w| dr where w < 0

  // Supporting evidence, copied from the diagnostics.
  double t_dyn_s = 0;
  double gamma1_pressure_weighted = 0;
  double sigma2_homologous = 0;
  std::vector<Gamma1Zone> gamma1_below_4_3_zones;
  double mass_g = 0, radius_cm = 0;
  double compactness = 0;
  double pn_coefficient = 0;
  double gamma1_critical_pn = 0;

  /// Consistency remarks and cautions (the fundamental above the homologous upper bound, a
  /// stable verdict while <Gamma1> < 4/3, an untrusted fundamental, Newtonian-stable but
  /// post-Newtonian-unstable, Newtonian-stable within a factor 2 of the post-Newtonian
  /// threshold, large compactness). Empty when all agree and nothing needs a caution.
  std::vector<std::string> notes;

  /// True when either verdict is unstable (what --fail-if-unstable tests).
  bool unstable() const noexcept {
    return newtonian == Verdict::unstable || post_newtonian == Verdict::unstable;
  }
};

/// Builds the verdict. `report` is make_mode_report() of a ModeSet that contains the
/// fundamental (e.g. solve_modes with count >= 1); an empty report or one without the
/// fundamental gives newtonian = undetermined. Throws UsageError for invalid options.
StabilityVerdict assess_stability(const ModelDiagnostics& diagnostics, const ModeReport& report,
                                  const StabilityOptions& options = {});

/// Writes "verdict": {...} into the JSON object currently open in `json` (docs/inspect.md).
void write_verdict_json(JsonWriter& json, const StabilityVerdict& v);

/// Writes the readable verdict block (several lines, units shown, ends with a newline).
void write_verdict_text(std::ostream& out, const StabilityVerdict& v);

} // namespace radmode
