#pragma once
// Galerkin linear finite elements for symmetric quadratic forms in one dimension, and the
// energy form of radial adiabatic pulsation (physics.md §4) built on them.
//
// Generic core. On a base mesh x_0 < x_1 < ... < x_n the forms
//     k(u, v) = ∫ [ a u'v' + b (u v' + u' v) + c u v ] dx  + k_first u(x_0)v(x_0) + k_last u(x_n)v(x_n)
//     m(u, v) = ∫ d u v dx                                  + m_first u(x_0)v(x_0) + m_last u(x_n)v(x_n)
// are sampled once (WeakForm) at Gauss–Legendre points inside every base interval. A finite-
// element mesh is any subset of the base nodes containing x_0 and x_n (for instance all of
// them, or every other one); its hat functions are integrated with the base-interval
// quadrature, so a coarse element spanning two base intervals sees exactly the same
// coefficients as the fine mesh does. The result is a symmetric tridiagonal pencil (K, M).
// A plain Sturm–Liouville problem -(p u')' + q u = lambda w u is a = p, b = 0, c = q, d = w.
//
// Stellar form (make_stellar_form). In units x = r/R, masses in M, P in G M^2/R^4 and
// rho in M/R^3 (so eigenvalues are sigma^2 = omega^2 R^3/(G M)):
//     K[xi] = ∫ [ Gamma1 P x^2 (3 xi + x xi')^2 - 4 m rho x xi^2 ] dx - 4 P_s xi(1)^2
//     M[xi] = ∫ rho x^4 xi^2 dx + P_s xi(1)^2
// i.e. a = Gamma1 P x^4, b = 3 Gamma1 P x^3, c = 9 Gamma1 P x^2 - 4 m rho x, d = rho x^4.
// The two surface terms (regular surface, default) are left out for fixed_pressure, whose
// natural condition is then delta P = 0. The inner node is free for `centre` (regularity is
// the natural condition) and removed (xi = 0) for `rigid`.
#include "radmode/eigensolve.hpp"
#include "radmode/structure.hpp"

#include <cstddef>
#include <functional>
#include <optional>
#include <vector>

namespace radmode {

/// Coefficients of the forms k and m at one point.
struct FormCoefficients {
  double a = 0, b = 0, c = 0, d = 0;
};

/// The forms sampled at the quadrature points of every base interval.
struct WeakForm {
  std::vector<double> x; ///< base mesh, strictly increasing (n + 1 nodes)
  int points_per_interval = 3;
  /// Per quadrature point (interval i, point q at index i * points_per_interval + q):
  /// local coordinate t in (0, 1) inside interval i, weight w (includes the interval length)
  /// and the coefficients.
  std::vector<double> t, w, a, b, c, d;
  double k_first = 0, k_last = 0, m_first = 0, m_last = 0; ///< boundary terms

  std::size_t interval_count() const noexcept { return x.empty() ? 0 : x.size() - 1; }
};

/// Gauss–Legendre points per base interval used by the samplers: exact for polynomials of
/// degree 5 inside each interval (the integrands are quadratic in the hat functions times
/// smooth coefficients).
inline constexpr int default_quadrature_points = 3;

/// Samples a generic form: `coefficients(interval, t, x)` returns a, b, c, d at
/// x = x_i + t (x_{i+1} - x_i). Throws UsageError if x is not strictly increasing or has fewer
/// than 2 nodes, or points_per_interval is not 1..5.
WeakForm sample_form(std::vector<double> x,
                     const std::function<FormCoefficients(std::size_t, double, double)>& coefficients,
                     int points_per_interval = default_quadrature_points);

/// Inverse units of the stellar form for `structure`: 1/(G M^2/R^4), 1/(M/R^3), 1/M.
struct StellarUnits {
  double inv_P = 0, inv_rho = 0, inv_M = 0;
};
StellarUnits stellar_units(const Structure& structure);

/// The stellar form's coefficients a, b, c, d (see the file comment) at x = r/R from the
/// structure's values there: the one formula behind make_stellar_form, also used to measure
/// how the coefficients change with the interpolation.
namespace detail {
/// stellar_coefficients' arithmetic on a number type T: double, or a vector of doubles (GCC
/// and Clang vector extension) evaluating several points at once, each lane with exactly the
/// operations of the double version.
template <class T> struct CoefficientsOf {
  T a, b, c, d;
};
template <class T>
inline CoefficientsOf<T> stellar_coefficients_of(T m_g, T P_cgs, T rho_cgs, T gamma1, T x,
                                                 const StellarUnits& u) {
  const T P = P_cgs * u.inv_P, rho = rho_cgs * u.inv_rho, m = m_g * u.inv_M;
  const T gp = gamma1 * P, x2 = x * x;
  return {gp * x2 * x2, 3.0 * gp * x2 * x, 9.0 * gp * x2 - 4.0 * m * rho * x, rho * x2 * x2};
}
} // namespace detail

inline FormCoefficients stellar_coefficients(const StructureValues& v, double x,
                                             const StellarUnits& u) {
  const auto k = detail::stellar_coefficients_of(v.m, v.P, v.rho, v.gamma1, x, u);
  FormCoefficients c;
  c.a = k.a;
  c.b = k.b;
  c.c = k.c;
  c.d = k.d;
  return c;
}

/// The change of stellar_coefficients(v, x, u) when the values change from v to v + dv,
/// computed from dv (no difference of nearly equal coefficients): with Gamma1 P -> its change
/// dGamma1 (P + dP) + Gamma1 dP and m rho -> dm (rho + drho) + m drho,
///     da = d(Gamma1 P) x^4, db = 3 d(Gamma1 P) x^3, dc = 9 d(Gamma1 P) x^2 - 4 d(m rho) x,
///     dd = drho x^4.
namespace detail {
/// stellar_coefficients_change's arithmetic on a number type T (see stellar_coefficients_of):
/// values m, P, rho, Gamma1 and their changes dm, dP, drho, dGamma1 (cgs).
template <class T>
inline CoefficientsOf<T> stellar_coefficients_change_of(T m_g, T P_cgs, T rho_cgs, T gamma1,
                                                        T dm_g, T dP_cgs, T drho_cgs,
                                                        T dgamma1, T x, const StellarUnits& u) {
  const T P = P_cgs * u.inv_P, rho = rho_cgs * u.inv_rho, m = m_g * u.inv_M;
  const T dP = dP_cgs * u.inv_P, drho = drho_cgs * u.inv_rho, dm = dm_g * u.inv_M;
  const T dgp = dgamma1 * (P + dP) + gamma1 * dP;
  const T dmrho = dm * (rho + drho) + m * drho;
  const T x2 = x * x;
  return {dgp * x2 * x2, 3.0 * dgp * x2 * x, 9.0 * dgp * x2 - 4.0 * dmrho * x, drho * x2 * x2};
}
} // namespace detail

inline FormCoefficients stellar_coefficients_change(const StructureValues& v,
                                                    const StructureValues& dv, double x,
                                                    const StellarUnits& u) {
  const auto k = detail::stellar_coefficients_change_of(v.m, v.P, v.rho, v.gamma1, dv.m, dv.P,
                                                        dv.rho, dv.gamma1, x, u);
  FormCoefficients c;
  c.a = k.a;
  c.b = k.b;
  c.c = k.c;
  c.d = k.d;
  return c;
}

/// The stellar energy form of `structure` in the units above (see the file comment). The base
/// mesh is structure.node_r() / R. omega2_unit() converts its eigenvalues to s^-2.
/// If `coefficients_from` is given, the coefficients at the quadrature points are taken from
/// that structure (evaluated by radius; it must span the same radii, mass and surface
/// pressure) instead: used to measure how much the eigenvalues depend on the interpolation
/// between table points (a structure made of every other table row).
WeakForm make_stellar_form(const Structure& structure, SurfaceCondition surface,
                           const Structure* coefficients_from = nullptr);

/// Every other table row of the prepared model (keeping the innermost and surface rows and
/// both rows of every discontinuity), as a Structure with the same inner condition; nullopt
/// when that leaves fewer than StellarModel::min_points rows.
std::optional<Structure> every_other_row(const Structure& structure);

/// G M / R^3 [s^-2]: omega^2 = sigma^2 * omega2_unit.
double omega2_unit(const Structure& structure);

/// Symmetric tridiagonal pencil. Row j belongs to base node `node[j]`.
struct TridiagonalPencil {
  std::vector<double> k_diag, k_off; ///< K: diagonal (size N), off-diagonal (size N - 1)
  std::vector<double> m_diag, m_off; ///< M: same layout, symmetric positive definite
  std::vector<std::size_t> node;     ///< base-mesh index of each unknown

  std::size_t size() const noexcept { return k_diag.size(); }
};

/// Which base nodes form the element mesh, and which end values are fixed to zero.
struct MeshSelection {
  std::vector<std::size_t> nodes; ///< increasing base indices, first 0 and last n
  bool fix_first = false;         ///< Dirichlet u = 0 at x_0 (the unknown is removed)
  bool fix_last = false;          ///< Dirichlet u = 0 at x_n
};

/// All base nodes.
std::vector<std::size_t> all_nodes(const WeakForm& form);
/// All nodes of a mesh of last + 1 nodes: 0 .. last.
std::vector<std::size_t> all_nodes(std::size_t last);
/// Every other base node, always keeping the first, the last and every node flagged in
/// `keep` (e.g. discontinuities; empty = none): elements span two base intervals, except
/// one single-interval element at the inner end of each stretch between kept nodes that has
/// an odd number of intervals.
std::vector<std::size_t> every_other_node(const WeakForm& form, const std::vector<bool>& keep = {});
/// Same rule for a mesh of last + 1 nodes.
std::vector<std::size_t> every_other_node(std::size_t last, const std::vector<bool>& keep = {});
/// Same rule with the kept nodes given as a list of node indices, increasing (entries <= 0
/// or >= last change nothing).
std::vector<std::size_t> every_other_node_keeping(std::size_t last,
                                                  const std::vector<std::size_t>& kept);
/// The indices of the true entries of `flags`, increasing.
std::vector<std::size_t> flagged_nodes(const std::vector<bool>& flags);

/// Galerkin assembly of the pencil on the selected mesh. O(number of quadrature points).
/// Throws UsageError for an invalid selection.
TridiagonalPencil assemble(const WeakForm& form, const MeshSelection& mesh);

/// The stellar form's pencil on the model mesh, without keeping the sampled form: the base
/// mesh x (make_stellar_form's) and the pencil assemble(make_stellar_form(structure, surface),
/// {all_nodes, fix_first, false}) builds, the same numbers bit for bit, in one pass (the
/// per-point arrays of WeakForm are neither allocated nor stored and read back).
struct ModelPencil {
  std::vector<double> x;    ///< base mesh, structure.node_r() / R
  TridiagonalPencil pencil; ///< on all base nodes; the first removed when fix_first
};
ModelPencil assemble_stellar_form(const Structure& structure, SurfaceCondition surface,
                                  bool fix_first);

/// Number of eigenvalues below s: the negative pivots of a twisted factorization of K - s M
/// (rows from both ends towards the middle; Sylvester's law of inertia). O(N), no
/// allocation. A zero pivot is replaced by a tiny negative one, so an eigenvalue exactly at s
/// counts as below.
int inertia_below(const TridiagonalPencil& pencil, double s);

} // namespace radmode
