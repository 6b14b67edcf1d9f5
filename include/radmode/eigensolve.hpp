#pragma once
// Radial adiabatic modes of a StellarModel by Galerkin finite elements of the energy form
// (see discretize.hpp for the pencil) solved with Spectra shift-invert Lanczos.
//
// Each mode's radial order is established twice:
//  - by inertia (Sylvester's law): the number of negative pivots of LDL^T(K - s M) just below
//    the eigenvalue equals the number of eigenvalues below it;
//  - by counting the sign changes (nodes) of xi in 0 < r < R.
// Disagreement is reported in the mode (order_agrees = false), never hidden.
//
// Accuracy: the pencil is solved on the model's mesh ("fine") and on a mesh with every other
// node removed ("coarse"); linear elements give O(h^2) eigenvalue error, which Richardson
// extrapolation removes: omega2 = omega2_fine + (omega2_fine - omega2_coarse)/3. The error
// estimate is |omega2_fine - omega2_coarse|/3 (the error of the fine value; the extrapolated
// value is normally far more accurate), plus the solver residual.
//
// Units: omega2 in s^-2 (omega angular frequency, time dependence exp(i omega t)).
#include "radmode/model.hpp"

#include <optional>
#include <string>
#include <vector>

namespace radmode {

enum class SurfaceCondition {
  regular,        ///< p = -(4 + omega^2 R^3/(G M)) xi at R (default; exact when P -> 0)
  fixed_pressure, ///< delta P = 0 at R
};

enum class InnerCondition {
  centre, ///< the model reaches (or is extended to) r = 0; regularity there (default)
  rigid,  ///< envelope model: xi = 0 at the innermost point
};

struct SolveOptions {
  SurfaceCondition surface = SurfaceCondition::regular;
  InnerCondition inner = InnerCondition::centre;
  int count = 5; ///< number of lowest modes (ignored when a window is set); 1..max
  /// If set: every mode with window_lo_omega2 <= omega2 <= window_hi_omega2 [s^-2] instead of
  /// the lowest `count`.
  std::optional<double> window_lo_omega2;
  std::optional<double> window_hi_omega2;
  bool richardson = true; ///< solve on the coarse mesh too, extrapolate and estimate the error

  /// Throws UsageError naming the option, its value and the allowed range.
  void validate() const;
};

/// One eigenmode.
struct ModeSolution {
  int order = -1;        ///< radial order k from the inertia count (0 = fundamental)
  int nodes = -1;        ///< sign changes of xi in 0 < r < R
  bool order_agrees = false; ///< order == nodes
  /// Inertia count just above the eigenvalue minus count just below: 1 for a simple,
  /// isolated eigenvalue. Anything else is reported as an order problem.
  int inertia_multiplicity = 0;

  double omega2 = 0;        ///< best value (extrapolated when richardson) [s^-2]
  double omega2_fine = 0;   ///< on the model mesh [s^-2]
  double omega2_coarse = 0; ///< on the every-other-node mesh [s^-2] (= fine if !richardson)
  double error_estimate = 0;///< absolute error estimate of omega2 [s^-2]
  double residual = 0;      ///< ||K x - w M x|| / (||K x|| + |w| ||M x||), fine mesh

  /// xi = delta r / r at the FE nodes (ModeSet::node_r), normalized to xi(R) = 1.
  std::vector<double> xi;

  bool trusted = false;  ///< order established both ways, residual and error estimate small
  std::string flag;      ///< why it is not trusted (empty when trusted)
};

enum class SolveStatus {
  ok,             ///< every requested mode found
  fewer_modes,    ///< fewer modes than requested exist / could be found (message says why)
  not_converged,  ///< the eigensolver did not converge
};

struct ModeSet {
  std::vector<double> node_r;      ///< FE node radii [cm], centre first (unique radii)
  std::vector<ModeSolution> modes; ///< in increasing omega2 (= increasing order)
  SolveStatus status = SolveStatus::ok;
  std::string message;             ///< details when status != ok
  int iterations = 0;              ///< Spectra restarts used (fine mesh)
};

/// Solves for the modes. Throws only for invalid options; numerical trouble is a status.
ModeSet solve_modes(const StellarModel& model, const SolveOptions& options = {});

} // namespace radmode
