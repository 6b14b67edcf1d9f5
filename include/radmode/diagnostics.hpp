#pragma once
// Model diagnostics: global properties, time scales, hydrostatic and mass consistency, the
// Gamma1 < 4/3 criterion (homologous) and its first post-Newtonian correction.
// See /work/shared/design/physics.md sections 2 and 5 and docs/dev-diag.md.
//
// Units: cgs throughout (g, cm, s, dyn cm^-2, g cm^-3); dimensionless where stated.
//
// Definitions (R = r.back(), M = m.back(), G from constants.hpp):
//   mean density      rho_mean = 3M / (4 pi R^3)
//   rho_c / rho_mean  with rho_c = rho at the innermost point (the centre when r[0] = 0)
//   t_dyn  = (G rho_mean)^-1/2,  t_K = (R^3/(G M))^1/2,  t_ff = (3 pi / (32 G rho_mean))^1/2
//   t_sc   = integral dr / c_s, c_s^2 = Gamma1 P / rho; per cell the rule 2 dr / (c_i + c_i+1),
//            exact when c_s^2 is linear in r across the cell, so a vanishing sound speed at a
//            P = 0 surface (integrable 1/sqrt singularity) gives a finite, second-order result.
//   <Gamma1> = int Gamma1 P r^2 dr / int P r^2 dr      (trapezoid in r)
//   sigma2_hom = 9 int (Gamma1 - 4/3) P r^2 dr / (int rho r^4 dr + R^6 P_s/(G M)) * R^3/(G M)
//            the Rayleigh quotient of xi = const in the regular-surface energy form (the
//            surface terms of the stiffness cancel by the virial theorem; the mass surface term
//            is kept and vanishes when P_s = 0). It is an upper bound of sigma0^2.
//   compactness = 2 G M / (R c^2)
//   post-Newtonian structure coefficient K = b / (3 a) with |W| = a G M^2/R = int G m dm / r and
//     b G^2 M^3 / R^2 = int dm [ (G/r)(U - Omega) + (G m/r)^2/2 + (G m/r)(u + P/rho) ],
//     U(r) = int_0^r u dm, Omega(r) = int_0^r (G m / r) dm (trapezoid in m on the m column).
//     The published K (1.1245 for n = 3, 19/42 for the uniform sphere) are pure structure
//     numbers: they follow from this integral with u = 3 P / rho, the internal energy of a
//     Gamma1 = 4/3 (radiation-dominated) gas -- the only regime where the post-Newtonian
//     criterion decides anything, since it needs <Gamma1> - 4/3 = O(G M/(R c^2)). With the
//     model's own u (Gamma1 = 5/3 gas: u = 1.5 P/rho) the same integral gives other numbers
//     (5/21 for the uniform sphere). PnEnergy selects which K enters the criterion; both
//     are reported. For gas plus radiation the two differ only at O(beta), i.e. at second
//     order in the small quantities of the criterion.
//   post-Newtonian criterion: unstable iff <Gamma1> - 4/3 < K * 2GM/(R c^2)
//     (Chandrasekhar 1964, ApJ 140, 417). Valid while the compactness is small (<~ 0.1).
//
// HSE residual (pointwise relative): |dP/dr + G m rho / r^2| / (G m rho / r^2). It is
// evaluated in two equivalent forms with the second-order three-point difference on the
// (non-uniform) table mesh:
//   radius form  dP/dr                 against -G m rho / r^2,
//   mass form    dP/d(m^(2/3))         against -3 G m^(4/3) / (8 pi r^4)   (= same relation),
// and the smaller of the two is kept at each point. The stencil starts with the nearest
// distinct neighbours and widens while P (mass form: P or m) differs from the point's value by
// less than 1e-4 relative -- a difference a table printed with 6 digits still resolves to 1 %
// (near the centre of a finely meshed model P hardly changes between points). Each form has
// its own failure mode that is not a property of the model, and is used only where it works:
//   radius form: where P changes by less than a factor 2 across the stencil (next to a P = 0
//     surface P has a power-law zero and the difference has an O(1) relative error);
//   mass form: where the mass differences are resolved (in the outer envelope m is constant to
//     the table's digits).
// A genuine departure from equilibrium shows in both forms. "Interior" = every point except
// the innermost and the outermost, skipping points with r = 0 or m = 0, points with
// P < hse_pressure_floor * max(P), and points where neither form is usable (all counted in
// hse_points_skipped). Measured on generated polytropes n = 1 ... 4.5 with 200 to 20000 points
// printed with 8 or more digits: max residual < 1e-2 (1e-5 ... 1e-3 typical); with 6 digits
// about 1e-2 ... 5e-2.
//
// Mass consistency: |(m(R) - m(r0)) - int_r0^R 4 pi r^2 rho dr| / (m(R) - m(r0)), trapezoid.

#include "radmode/json.hpp"
#include "radmode/model.hpp"

#include <cstddef>
#include <ostream>
#include <string>
#include <vector>

namespace radmode {

/// Which specific internal energy u enters the post-Newtonian coefficient K used in the verdict.
enum class PnEnergy {
  radiation_limit, ///< u = 3 P / rho: the structure coefficient of the published K (default)
  model,           ///< the model's u column, else P / ((Gamma1 - 1) rho)
};

struct DiagnosticsOptions {
  double hse_warn = 1e-2;            ///< warn when the max HSE residual exceeds this (> 0)
  double mass_warn = 1e-3;           ///< warn when the mass inconsistency exceeds this (> 0)
  double hse_pressure_floor = 1e-10; ///< skip points with P below this times max P, in [0, 1)
  double compactness_warn = 0.1;     ///< warn that 1PN is unreliable above this (> 0)
  PnEnergy pn_energy = PnEnergy::radiation_limit;
  /// The checks: the hydrostatic-equilibrium residual and the sound-crossing time, with their
  /// warnings. false skips them (hse_* stay 0, hse_points_checked 0, t_sound_s NaN; no
  /// hse_unchecked, hse_residual or sound_time_infinite warning) for callers that read only
  /// the masses, time scales, integrals and the stability criteria -- `radmode track`.
  bool checks = true;
  /// Only what the two stability verdicts need: points, mass, radius, mean and central
  /// density, has_centre, surface pressure, the time scales (t_sound_s NaN), the
  /// pressure-weighted <Gamma1>, compactness, binding_a and the post-Newtonian coefficient,
  /// critical Gamma1 and verdict (the model-energy coefficient only with pn_energy = model) --
  /// each bit for bit as in the full run. The other doubles are NaN, the Gamma1 zones empty,
  /// the HSE fields 0, and there are no warnings. Implies checks = false. For `radmode
  /// track`, whose rows read nothing else.
  bool stability_only = false;

  /// Throws UsageError naming the option, its value and the allowed range.
  void validate() const;
};

/// One contiguous layer where Gamma1 < 4/3 (Gamma1 linear in r between points; crossings
/// interpolated, m linear in r across the crossing cell).
struct Gamma1Zone {
  double r_inner_cm = 0, r_outer_cm = 0;
  double m_inner_g = 0, m_outer_g = 0;
  double gamma1_min = 0;
  std::size_t first_line = 0, last_line = 0; ///< table lines of the first/last point inside
                                              ///< (0 for generated models or no inner point)
};

struct DiagnosticWarning {
  std::string code;    ///< short machine-readable name, e.g. "hse_residual"
  std::string message; ///< complete human-readable sentence with the numbers
};

struct ModelDiagnostics {
  std::size_t points = 0;
  double mass_g = 0, radius_cm = 0;
  double mean_density_g_cm3 = 0;
  double rho_c_g_cm3 = 0;        ///< density at the innermost point
  double rho_c_over_mean = 0;
  bool has_centre = false;       ///< r[0] == 0
  double surface_pressure = 0;   ///< P_s [dyn cm^-2]

  double t_dyn_s = 0, t_kepler_s = 0, t_freefall_s = 0;
  double t_sound_s = 0;          ///< +inf when c_s = 0 on two adjacent points

  double hse_residual_max = 0;   ///< max pointwise relative residual over the interior
  double hse_worst_r_cm = 0;     ///< where it sits
  double hse_worst_m_g = 0;
  std::size_t hse_worst_index = 0;  ///< 0-based point index
  std::size_t hse_worst_line = 0;   ///< table line (0 = not from a file)
  std::size_t hse_points_checked = 0;
  std::size_t hse_points_skipped = 0;

  double mass_integral_g = 0;    ///< int 4 pi r^2 rho dr over the table
  double mass_consistency = 0;   ///< relative difference to m(R) - m(r0)

  double gamma1_pressure_weighted = 0;
  double gamma1_min = 0;
  double gamma1_min_r_cm = 0;
  std::vector<Gamma1Zone> gamma1_below_4_3_zones;
  double sigma2_homologous = 0;  ///< dimensionless (units of G M / R^3)
  double omega2_homologous = 0;  ///< s^-2

  double compactness = 0;        ///< 2 G M / (R c^2)
  double binding_a = 0;          ///< |W| = a G M^2 / R
  double pn_coefficient = 0;     ///< K entering the criterion (per options.pn_energy)
  double pn_coefficient_radiation_limit = 0; ///< K with u = 3 P / rho
  double pn_coefficient_model_energy = 0;    ///< K with the model's u (or P/((Gamma1-1) rho));
                                             ///< NaN when neither is defined (Gamma1 <= 1)
  PnEnergy pn_energy = PnEnergy::radiation_limit;
  bool model_has_u = false;      ///< the table gave a u column
  double gamma1_critical_pn = 0; ///< 4/3 + K * compactness
  bool pn_unstable = false;      ///< <Gamma1> - 4/3 < K * compactness

  std::vector<DiagnosticWarning> warnings;
};

/// Computes every quantity above. The model must satisfy validate_model(); throws UsageError
/// for invalid options and Error(numerical) when a required integral is not positive
/// (e.g. all pressures zero).
ModelDiagnostics diagnose(const StellarModel& model, const DiagnosticsOptions& options = {});

/// "radiation_limit" / "model".
const char* pn_energy_name(PnEnergy e) noexcept;

/// Writes the diagnostics as key/value pairs into the JSON object currently open in `json`
/// (snake_case keys, units in the names; see docs/inspect.md). Does not write "warnings".
void write_diagnostics_json(JsonWriter& json, const ModelDiagnostics& d);

/// Writes the readable diagnostics block (model, time scales, checks, Gamma1 criterion,
/// relativity, warnings), every quantity with its units; ends with a newline.
void write_diagnostics_text(std::ostream& out, const ModelDiagnostics& d);

/// Writes "warnings": [{"code": ..., "message": ...}, ...] into the open object.
void write_warnings_json(JsonWriter& json, const std::vector<DiagnosticWarning>& warnings);

} // namespace radmode
