#pragma once
// Radial adiabatic modes by shooting: an independent check of the finite-element eigenvalues
// (eigensolve.hpp) that shares only the interpolated equilibrium structure with them.
//
// Equations (physics.md section 3), with x = r/R, t = ln x, q = m/M, sigma^2 = omega^2 R^3/(GM):
//     dxi/dt = -3 xi - p/Gamma1
//     dp/dt  = Vp p + V (4 + sigma^2 x^3/q) xi,    V = G m rho/(r P),  Vp = -dlnP/dlnr
// xi = delta r/r, p = delta P/P. In hydrostatic equilibrium Vp = V and this is physics.md's
// system. For a tabulated model the two are kept apart on purpose: this form is exactly the
// Euler-Lagrange equation of the energy functional K/M of physics.md section 4 evaluated with the
// interpolated P, rho, m, Gamma1 of structure.hpp (the flux P r^3 p is what stays continuous), so
// the shooting solves the very continuous problem the finite elements discretize, and the two
// eigenvalues must agree to the finite-element error estimate, whatever small departure from
// hydrostatic equilibrium the interpolation has. At a density discontinuity xi and delta P are
// continuous: p jumps by the pressure ratio of the two table rows (1 when P is continuous).
//
// Method
//  - Integration: Boost.Odeint runge_kutta_dopri5, controlled (adaptive) with relative and
//    absolute tolerance rel_tol, in t = ln x, restarted at every table node (the interpolated
//    coefficients are only piecewise smooth).
//  - Centre: start at x0 = min(1e-3, 0.1 rel_tol^(1/4)) with the second-order regular series
//    xi = 1 + a x^2, p = -3 Gamma1 + b x^2, b = V2 (4 + s - 3 Gamma1)/2, a = -b/(5 Gamma1),
//    V2 = V/x^2 and s = sigma^2 x^3/q taken at x0. Inside the innermost table interval the
//    structure's linear m would put an r^-2 density cusp at the centre, from which no regular
//    solution starts; there m = m_1 (r/r_1)^3 and Vp = V (effect on omega^2: O((r_1/R)^5)).
//    Rigid inner boundary (envelope): xi = 0, p = 1 at the innermost point; a model that
//    reaches r = 0 gets the regular centre start even then (xi(0) = 0 is no constraint on the
//    energy functional there: its weight vanishes like r^4, so the finite elements see the
//    same eigenvalues).
//  - Surface: where P_s > 0 the integration starts exactly at x = 1 with the chosen condition.
//    Where P_s = 0, V ~ 1/(1-x) is singular; the integration starts at x = 1 - delta
//    (delta = min(1e-7, 1e-3 x last interval)) with the regular condition
//    p = -(V/Vp)(4 + sigma^2 x^3/q) xi. Inward integration is the stable direction there: the
//    irregular solution behaves like (1-x)^-(n+1) for a local polytropic index n and dies out
//    inward, so the O(delta) inconsistency of the start leaves an O(delta^(n+2)) error
//    (delta^2 ln delta for n = 0). The stiffness is mild (V grows like 1/(1-x)), so the explicit
//    controlled stepper stays cheap. With P_s = 0 both surface conditions reduce to the regular
//    one (the only bounded solution).
//  - Mismatch at the matching point x_m: D = (xi_in p_out - xi_out p_in)/(|y_in| |y_out|), the
//    sine of the angle between the inner and outer solution vectors; continuous in sigma^2 and
//    zero exactly at an eigenvalue. The root is bracketed by steps doubling from 1e-6 up to
//    0.5 max(|guess|, 1) on both sides of the guess (nearest sign change wins), then refined by
//    Illinois regula falsi with bisection safeguard, never leaving the bracket.
//  - Nodes: sign changes of xi along the inner and the (rescaled) outer solution, 0 < r < R.
//  - Error estimate: the eigenvalue is computed again with 10x and 100x looser tolerances from
//    the converged value; the larger of the differences tight-10x and 10x-100x (each
//    overestimates the error of the tight solve for a method whose global error scales with
//    the tolerance; taking both guards against one being small by accident) plus the final
//    bracket width plus a floor of rel_tol max(|sigma^2|, 1). When a looser solve fails the
//    result is reported as not converged (a value without an error estimate is not trusted).
//
// Units: omega2 in s^-2; sigma2 dimensionless.
#include "radmode/eigensolve.hpp"
#include "radmode/model.hpp"

#include <cstddef>
#include <functional>
#include <string>
#include <vector>

namespace radmode {

struct ShootOptions {
  SurfaceCondition surface = SurfaceCondition::regular;
  InnerCondition inner = InnerCondition::centre;
  double rel_tol = 1e-10;     ///< Odeint relative and absolute tolerance; 1e-14 .. 1e-3
  double match_r_frac = 0.5;  ///< matching radius r_m/R, in (0, 1); moved to the middle of
                              ///< the model when it lies outside it (envelopes)
  int max_iterations = 100;   ///< root-finder evaluations of the mismatch; 5 .. 10000
  /// verify_modes: the two eigenvalues agree when |FE - shoot| <= agree_factor x (FE error
  /// estimate + shooting error estimate) + 1e-9 (|omega^2| + GM/R^3) (round-off floor); 1 .. 1e6
  double agree_factor = 3.0;

  /// Throws UsageError naming the option, its value and the allowed range.
  void validate() const;
};

struct ShootResult {
  bool converged = false;
  double omega2 = 0;          ///< eigenvalue [s^-2]
  double sigma2 = 0;          ///< omega2 R^3/(G M)
  int nodes = -1;             ///< sign changes of xi in 0 < r < R
  double mismatch = 0;        ///< |D| at the returned eigenvalue (0 at an exact root)
  double error_estimate = 0;  ///< absolute error estimate of omega2 [s^-2]
  int iterations = 0;         ///< mismatch evaluations used
  std::string message;        ///< why it did not converge, or notes (empty when none)
};

/// Dimensionless coefficients of the first-order system at x = r/R.
struct LaweCoefficients {
  double V = 0;         ///< G m rho/(r P)
  double Vp = 0;        ///< -dlnP/dlnr (= V in hydrostatic equilibrium)
  double gamma1 = 0;    ///< Gamma1
  double x3_over_q = 0; ///< (r/R)^3/(m/M): the omega^2 term is sigma^2 x3_over_q
};

/// A structure in the form the shooting integrator needs; lets tests feed exact coefficients.
struct ShootingProblem {
  double x_inner = 0;  ///< innermost point r/R (0 with a centre)
  /// Where the inward integration starts: 1 when P_s > 0, slightly below 1 when P_s = 0.
  double x_surface = 1;
  bool singular_surface = false; ///< P -> 0 at R (both surface conditions become the regular one)
  /// Radii r/R where the coefficients are not smooth (table nodes, discontinuities), strictly
  /// increasing, inside (x_inner, x_surface). The integration restarts at each.
  std::vector<double> breaks;
  /// Same size as breaks (or empty = all 1): P just inside / P just outside each break. The
  /// integration keeps delta P continuous: p_outside = p_inside * pressure_jump.
  std::vector<double> pressure_jump;
  /// Coefficients at x inside piece `piece` (0 below breaks[0], i between breaks[i-1] and
  /// breaks[i], ...), evaluated from that piece's side (x may sit exactly on its ends).
  std::function<LaweCoefficients(double x, std::size_t piece)> coefficients;
};

/// Refines the eigenvalue nearest sigma2_guess of a dimensionless problem.
/// Numerical trouble is reported in the result, never thrown (options are validated: UsageError).
ShootResult shoot_sigma2(const ShootingProblem& problem, double sigma2_guess,
                         const ShootOptions& options = {});

/// The same problem built from the model's interpolated structure (structure.hpp).
ShootingProblem shooting_problem(const StellarModel& model, const ShootOptions& options = {});

/// Refines the eigenvalue of `model` nearest omega2_guess [s^-2] (e.g. the FE value).
ShootResult shoot_mode(const StellarModel& model, double omega2_guess,
                       const ShootOptions& options = {});

/// Result of checking one finite-element mode by shooting.
struct VerifyResult {
  int order = -1;             ///< FE order (inertia count) of the mode
  double omega2_fe = 0;       ///< [s^-2]
  double omega2_shoot = 0;    ///< [s^-2] (= omega2_fe when shooting failed)
  double abs_diff = 0;        ///< |omega2_shoot - omega2_fe| [s^-2]
  double rel_diff = 0;        ///< abs_diff / max(|omega2_fe|, 1e-6 GM/R^3)
  double tolerance = 0;       ///< allowed abs_diff (see ShootOptions::agree_factor) [s^-2]
  bool nodes_agree = false;   ///< shooting node count == FE order
  bool agrees = false;        ///< shooting converged, abs_diff <= tolerance and nodes_agree
  ShootResult shoot;          ///< the shooting result itself
};

/// Checks every mode of a ModeSet by shooting from its FE eigenvalue with the ModeSet's
/// boundary conditions (taken from `options`). One entry per mode, in the same order.
std::vector<VerifyResult> verify_modes(const StellarModel& model, const ModeSet& modes,
                                       const ShootOptions& options = {});

} // namespace radmode
