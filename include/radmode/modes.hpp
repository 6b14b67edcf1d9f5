#pragma once
// Per-mode physical quantities and eigenfunction profiles derived from a solved ModeSet
// (physics.md sections 2-4). Core library: computes values, never prints.
//
// Quantities per mode (units in the names):
//   sigma2          = omega^2 R^3/(G M)                         (dimensionless eigenvalue)
//   period          = 2 pi / omega                              (only when omega^2 > 0)
//   frequency       = 1 / period  in microHz and cycles per day (only when omega^2 > 0)
//   Q_d             = period_d (M/M_sun)^(1/2) (R/R_sun)^(-3/2) = 0.115836 d / sigma
//   omega_t_dyn     = omega t_dyn, t_dyn = (G rho_bar)^(-1/2)   (only when omega^2 > 0)
//   inertia         = int xi^2 r^2 dm / (M R^2 xi(R)^2)
//   growth_rate_s   = eta = (-omega^2)^(1/2), e-folding time 1/eta (only when omega^2 < 0)
// "Absent" values are std::nullopt (written as null / left empty by the writers): a report
// never contains NaN or infinity.
//
// Eigenfunction derivative (linear elements). xi is piecewise linear between FE nodes, so
// xi' is constant on each element. Node values of xi' are the average of the two adjacent
// element slopes weighted by the opposite element lengths,
//     xi'_i = (h_{i-1} s_i + h_i s_{i-1}) / (h_{i-1} + h_i),   s_i = slope of element i,
// which is the second-order three-point derivative on a non-uniform mesh; at the two mesh
// ends it is the derivative of the parabola through the last three nodes (also second order;
// the end element's own slope would be only first order, which shows as a spurious jump of
// delta P/P at the surface where xi is steep).
// Integrals (M[xi], inertia, int w dr) are instead taken element by element with the exact
// element slope and two-point Gauss-Legendre quadrature, the model coefficients being
// interpolated at the Gauss points by Structure (structure.hpp: P and rho log-linearly in r,
// m and Gamma1 linearly, centre extension and discontinuities as there). Node values of the
// coefficients at a discontinuity are those of the outer side. Both are second-order
// accurate in the mesh spacing.
#include "radmode/eigensolve.hpp"
#include "radmode/json.hpp"
#include "radmode/model.hpp"

#include <optional>
#include <string>
#include <vector>

namespace radmode {

/// Trade label of radial order k: "F" (k = 0), "1O", "2O", ...; "?" when k < 0 (unknown).
std::string mode_label(int order);

/// Time scales of the model (physics.md section 2).
struct ModelScales {
  double mass_g = 0;
  double radius_cm = 0;
  double mean_density = 0; ///< rho_bar = 3M/(4 pi R^3) [g cm^-3]
  double t_dyn_s = 0;      ///< (G rho_bar)^(-1/2) [s]
  double t_kepler_s = 0;   ///< (R^3/(G M))^(1/2) [s], the unit of sigma = omega t_K
};
ModelScales model_scales(const StellarModel& model);

/// Pulsation constant Q [d] of a period [s] for mass [g] and radius [cm] (physics.md 2).
double pulsation_constant_d(double period_s, double mass_g, double radius_cm);

/// Physical quantities of one mode.
struct ModeQuantities {
  int order = -1;           ///< radial order from the inertia count
  std::string label;        ///< F, 1O, 2O, ...
  int nodes = -1;           ///< sign changes of xi in 0 < r < R
  bool order_agrees = false;///< order == nodes and the eigenvalue is simple

  double omega2_s2 = 0;     ///< omega^2 [s^-2]
  double sigma2 = 0;        ///< omega^2 R^3/(G M)

  // Oscillatory modes only (omega^2 > 0 and the sign established, i.e. !sign_uncertain: a
  // period of a mode that may as well not oscillate is not reported).
  std::optional<double> period_s, period_h, period_d;
  std::optional<double> frequency_uHz;  ///< cyclic frequency [microHz]
  std::optional<double> frequency_cd;   ///< cyclic frequency [cycles per day]
  std::optional<double> Q_d;            ///< pulsation constant [d]
  std::optional<double> omega_t_dyn;    ///< omega t_dyn (dimensionless)

  // Growing modes only (omega^2 < 0 and !sign_uncertain).
  std::optional<double> growth_rate_s;      ///< eta [s^-1]
  std::optional<double> growth_time_s;      ///< e-folding time 1/eta [s]
  std::optional<double> growth_time_t_dyn;  ///< e-folding time in units of t_dyn

  std::optional<double> inertia;     ///< E; absent when xi(R) = 0
  /// Absolute error estimate of omega^2 from the solver [s^-2]. Without Richardson
  /// extrapolation (SolveOptions::richardson = false) it holds only the solver residual, not
  /// the discretization error: then error_estimate_rel is absent.
  double error_estimate_s2 = 0;
  /// error_estimate_s2 / |omega^2|; absent when omega^2 = 0 or without extrapolation.
  std::optional<double> error_estimate_rel;
  /// Rayleigh quotient K[xi]/M[xi] of the reported eigenfunction = int w dr + surface term
  /// [s^-2]; agrees with omega2_s2 to the discretization error (a consistency check).
  std::optional<double> omega2_rayleigh_s2;

  bool stable = true;       ///< omega^2 > 0
  /// |omega^2| is within its error estimate: the sign (stable or not) is not established.
  /// Period, frequency and growth fields are then all absent.
  bool sign_uncertain = false;
  bool trusted = false;     ///< from the solver: order established both ways, small error
  std::string flag;         ///< why the mode is not trusted (empty when trusted)
};

/// P_k / P_0 for an oscillatory overtone k relative to the oscillatory fundamental.
struct PeriodRatio {
  int order = 0;
  std::string label;
  double ratio = 0;
};

/// Eigenfunctions of one mode at the FE nodes, normalized to xi(R) = 1 (physics.md 4).
struct ModeProfile {
  int order = -1;
  std::string label;
  std::vector<double> r_over_R, m_over_M;
  std::vector<double> xi;        ///< delta r / r
  std::vector<double> dP_P;      ///< delta P / P = -Gamma1 (3 xi + r xi')
  std::vector<double> drho_rho;  ///< delta rho / rho = -(3 xi + r xi')
  std::vector<double> dT_T;      ///< nabla_ad delta P / P; empty when the model has no nabla_ad
  /// Weight function made dimensionless: w(r) R / (G M / R^3); int weight d(r/R) plus the
  /// surface term = sigma^2.
  std::vector<double> weight;
  /// Gamma1 sensitivity P r^2 (3 xi + r xi')^2 / M[xi], times R/(G M/R^3):
  /// delta sigma^2 = int gamma1_kernel delta Gamma1 d(r/R) at fixed structure.
  std::vector<double> gamma1_kernel;
  /// With the regular surface condition: the value it prescribes at R, -(4 + sigma^2) xi(R).
  /// The profile's own dP_P.back() comes from the finite-element xi' and can differ from it
  /// next to a zero-pressure surface, where the energy form hardly constrains xi' (the
  /// compression term is weighted by P -> 0); the profiles file states both.
  std::optional<double> surface_dP_P_condition;
};

/// Everything reported about a ModeSet.
struct ModeReport {
  ModelScales scales;
  std::vector<ModeQuantities> modes;  ///< same order as ModeSet::modes
  std::vector<ModeProfile> profiles;  ///< one per mode, same order
  std::vector<PeriodRatio> period_ratios;
  /// Why period_ratios is empty when it is (no fundamental, unstable fundamental, ...).
  std::string period_ratio_note;
};

/// Derives the report. `options` must be those the ModeSet was solved with (the surface
/// condition decides the surface terms of K and M, the inner condition the centre extension).
/// Throws InputError for an invalid model (validate_model), Error(numerical) when the ModeSet
/// is inconsistent (eigenfunction length differs from node_r, a node outside the model).
ModeReport make_mode_report(const StellarModel& model, const ModeSet& set,
                            const SolveOptions& options);

/// Writes one mode as a JSON object (keys as the ModeQuantities members; absent -> null).
void write_mode_json(JsonWriter& json, const ModeQuantities& q);

/// Header line and rows of the per-mode CSV table (same columns as the JSON keys).
std::string mode_csv_header();
std::string mode_csv_row(const ModeQuantities& q);

/// Profiles file: text, one block per mode (documented in docs/modes.md).
std::string format_profiles(const ModeReport& report, const std::string& model_source);

} // namespace radmode
