#pragma once
// Internal to radmode_core: kernels on symmetric tridiagonal pencils (K, M) that work on
// several shifts or vectors at once, and the Galerkin coarsening used by the nested solve.
//
// Why blocks: the LDL^T recurrence of K - s M, d_j = (K - sM)_jj - e_{j-1}^2 / d_{j-1}, is a
// chain of dependent divisions, so one factorization runs at the latency of the divider.
// Factorizations at different shifts are independent: advancing several of them in the same
// loop, two to a vector instruction, lets the processor overlap their divisions, and up to
// six shifts cost little more than one. Every per-shift result is exactly what the one-shift code computes (same operations
// in the same order), so inertia counts do not depend on how shifts were grouped.
#include "radmode/discretize.hpp"

#include <cstddef>
#include <optional>
#include <vector>

namespace radmode::detail {

/// counts[b] = inertia_below(p, shifts[b]) for every b (same arithmetic, same results).
std::vector<int> inertia_below_many(const TridiagonalPencil& p, const std::vector<double>& shifts);

/// What the last Rayleigh quotient step measured of a vector (NaN where not measured: no step
/// taken, or no residual requested).
struct RqiStats {
  double rho;     ///< Rayleigh quotient x^T K x / x^T M x
  double xmx;     ///< x^T M x
  double r_norm;  ///< ||K x - rho M x||
  double kx_norm; ///< ||K x||
  double mx_norm; ///< ||M x||
  double a_norm;  ///< || |K||x| + |rho||M||x| || (round-off scale of the residual)
  int steps;      ///< steps taken by the vector's block (a converged vector rides along)
};

/// Rayleigh quotient iteration on every vector of `xs` together (each of size p.size()):
/// x <- (K - rho(x) M)^{-1} M x, scaled to x^T M x = 1, at most `max_steps` steps. With
/// residual_tol > 0 a vector stops after the first step whose residual
/// ||K x - rho M x|| / (||K x|| + |rho| ||M x||) is at most max(residual_tol, 10 x its
/// round-off level, see RqiStats::a_norm); otherwise once, after at least `min_steps` steps,
/// its quotient changes by no more than 1e-14 |rho| + 4 eps `scale` between steps (scale:
/// magnitude of the spectrum). Vectors that become zero or non-finite are left as they were
/// before the failing step. The first step of vector i uses first_shifts[i] instead of its
/// quotient when given (and not NaN): a better estimate of the eigenvalue, e.g. extrapolated
/// from coarser meshes, makes that step far more effective. Returns what the last step of each
/// vector measured (see RqiStats).
/// With `from`: xs hold vectors of the coarser pencil from->coarse instead, linearly
/// interpolated onto p's rows as they are loaded (see Prolongation), and are replaced by
/// vectors of p's size.
struct Prolongation;
std::vector<RqiStats> rayleigh_iterate(const TridiagonalPencil& p,
                                     std::vector<std::vector<double>>& xs, int min_steps,
                                     int max_steps, double scale, double residual_tol = 0,
                                     const std::vector<double>& first_shifts = {},
                                     const Prolongation* from = nullptr);

/// rayleigh_iterate runs its blocks of three or more vectors on four lanes (AVX2) where this
/// build (x86-64, GCC) and the processor allow, else on two (SSE2, NEON). Both kernels do the
/// same operations per lane, so their results are equal bit for bit (test_pencil_block).
/// wide_kernel_available(): the four-lane kernel can run here; use_wide_kernel(false) makes
/// every later call use the two-lane one (for that test; process-wide), true restores it.
bool wide_kernel_available();
void use_wide_kernel(bool on);

/// Linear interpolation of vectors of a coarser pencil onto a finer one, both selecting nodes
/// of the same base mesh with coordinates x (pencil.node: base node of each row). A base end
/// node without a row (a removed Dirichlet end) counts as 0. Fine row j at base coordinate
/// x_j between consecutive coarse nodes a < b takes (1 - t) c_a + t c_b, t = (x_j - x_a) /
/// (x_b - x_a).
struct Prolongation {
  const std::vector<double>& x;
  const TridiagonalPencil& coarse;
};


/// A coarse level of a nested family of linear-element meshes: the node list (indices into
/// the base mesh, including a Dirichlet end whose unknown is removed) and its pencil.
struct MeshLevel {
  std::vector<std::size_t> nodes; ///< increasing base indices, first and last base node included
  bool fix_first = false;         ///< the first node's unknown is removed (u = 0 there)
  TridiagonalPencil pencil;       ///< row j belongs to base node pencil.node[j]
};

/// The next coarser level: every other node of `fine.nodes` (keeping its ends and the base
/// nodes listed in `kept_base`, increasing, see every_other_node), with the Galerkin pencil
/// P^T K P, P^T M P, P the linear interpolation from the coarse to the fine level (x: base
/// mesh coordinates). For nested linear elements with one shared quadrature this is exactly
/// the pencil assemble() would build on the coarse mesh, at O(N) cost without re-reading the
/// quadrature data. nullopt when fewer than 2 coarse unknowns would remain.
std::optional<MeshLevel> coarsen(const std::vector<std::size_t>& fine_nodes, bool fix_first,
                                 const TridiagonalPencil& fine_pencil, const std::vector<double>& x,
                                 const std::vector<std::size_t>& kept_base);
inline std::optional<MeshLevel> coarsen(const MeshLevel& fine, const std::vector<double>& x,
                                        const std::vector<std::size_t>& kept_base) {
  return coarsen(fine.nodes, fine.fix_first, fine.pencil, x, kept_base);
}

} // namespace radmode::detail
