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
// value is normally far more accurate), plus interpolation_error, plus the solver residual
// and round-off: 2 residual |omega2| + 10 eps sqrt(sum_i (|x_i| sum_j |K_ij x_j|)^2) / x^T M x,
// the second term ten standard deviations of independent rounding errors of the products
// K_ij x_i x_j (a statistical estimate; the worst case, eps sum |x_i K_ij x_j|, grows like
// N^2 and exceeds the observed round-off by orders of magnitude on large meshes).
//
// Solution path (solve_modes): nested iteration over a family of meshes, each every other
// node of the one above (pencils by Galerkin restriction, identical to assembling them):
// the coarsest (at least max(4 count + 40, 100) unknowns) by multisection on the inertia count
// plus Rayleigh quotient iteration (up to 400 unknowns; Spectra shift-invert Lanczos above
// that, or when the multisection cannot separate the eigenvalues),
// then Rayleigh quotient iteration on each finer mesh from the prolonged eigenvectors of the
// one below, up to the every-other-node mesh and the model mesh (both are needed for
// Richardson anyway); on the two top meshes it runs until the residual is below 1e-7
// (every-other-node) and 1e-9 (model mesh). If the coarse mesh is too small for the request,
// Spectra runs on the fine mesh. Every eigenvalue's index on both top meshes is then verified
// by inertia; a missing index is recovered by bisection on the inertia count + inverse
// iteration.
// The error estimate also contains the sensitivity to the interpolation between table points
// (ModeSolution::interpolation_error) and a residual/round-off term.
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
  /// Fill ModeSolution::xi and ModeSet::node_r. false: everything else as usual (omega^2,
  /// order, node count, errors, flags) without copying out the eigenfunctions -- all that a
  /// row of `radmode track` needs.
  bool eigenfunctions = true;

  static constexpr int max_count = 10000; ///< upper limit of `count`

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
  /// ||K x - w M x|| / (||K x|| + max(|w|, w_ref) ||M x||) on the fine mesh, w_ref the
  /// largest |w| among the modes solved together (see PencilEigenpair::residual).
  double residual = 0;
  /// Round-off level of `residual` (PencilEigenpair::residual_floor). A residual counts as
  /// large above max(1e-8, 10 residual_floor): on fine meshes the floor itself exceeds 1e-8
  /// (it grows like N^2: about 1e-7 at 200,000 points).
  double residual_floor = 0;
  /// Part of error_estimate [s^-2] due to the interpolation of the model between its table
  /// points: |dw|/3, dw the first-order change of omega2 (x^T (dK - w dM) x for the fine
  /// eigenvector, the change of the form integrated with Simpson's rule on every element)
  /// when the model is interpolated from every other table row instead of all rows
  /// (interpolation error is at worst O(h^2) like the discretization error). 0 when
  /// !richardson.
  double interpolation_error = 0;

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
  int iterations = 0;              ///< Spectra restarts used (on the coarse mesh when the
                                   ///< fine one was reached by nested iteration, see above)
};

/// Solves for the modes. Throws only for invalid options; numerical trouble is a status.
ModeSet solve_modes(const StellarModel& model, const SolveOptions& options = {});

// ---- The engine under solve_modes, usable for any symmetric tridiagonal pencil ----------
// (discretize.hpp builds pencils; the same code solves the stellar problem and, in the tests,
// plain Sturm–Liouville problems.)

struct TridiagonalPencil; // discretize.hpp

/// Which eigenvalues of K x = lambda M x to compute. Eigenvalue index j counts the
/// eigenvalues below it (0 = lowest), established by inertia.
struct PencilRequest {
  int first = 0; ///< lowest index wanted
  int count = 5; ///< number of consecutive indices wanted (first .. first + count - 1)
  /// If both set: every eigenvalue with window_lo <= lambda <= window_hi instead of
  /// first/count (pencil units).
  std::optional<double> window_lo, window_hi;
};

struct PencilEigenpair {
  double lambda = 0;       ///< Rayleigh quotient x^T K x / x^T M x of the computed vector
  int index = -1;          ///< number of eigenvalues below lambda (inertia, just below it)
  int multiplicity = 0;    ///< inertia just above minus just below (1 when simple)
  /// ||K x - lambda M x|| / (||K x|| + max(|lambda|, lambda_ref) ||M x||), lambda_ref the
  /// largest |lambda| of the request (so that an eigenvalue at 0 gets a meaningful number).
  double residual = 0;
  /// Round-off level of `residual`: eps || |K||x| + |lambda||M||x| || over the same
  /// denominator. A converged vector's residual sits at a fraction of it.
  double residual_floor = 0;
  std::vector<double> x;   ///< eigenvector, x^T M x = 1
};

struct PencilSpectrum {
  std::vector<PencilEigenpair> pairs; ///< increasing lambda, one per requested index
  SolveStatus status = SolveStatus::ok;
  std::string message;
  int iterations = 0;  ///< Spectra restarts
  int recovered = 0;   ///< pairs Spectra missed, found by inertia bisection + inverse iteration
  /// Work of the Rayleigh quotient iteration: rows x vectors summed over every step on every
  /// mesh (each step is an O(rows) factorization and solve per vector). For the nested solve
  /// of a large pencil it stays a fixed multiple of size x count: the iteration is O(N).
  std::size_t iteration_work = 0;
  double shift = 0;    ///< shift used for the shift-invert solve
};

/// Computes the requested eigenpairs: shift chosen from inertia counts, Spectra shift-invert
/// Lanczos with an O(N) tridiagonal LDL^T operator (dense solve for N <= 40), every result
/// checked by inertia; a missed index is recovered by bisection on the inertia count plus
/// inverse iteration. Throws UsageError for an invalid request or pencil.
PencilSpectrum solve_pencil(const TridiagonalPencil& pencil, const PencilRequest& request);

} // namespace radmode
