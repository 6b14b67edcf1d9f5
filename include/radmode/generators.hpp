#pragma once
// Reference models generated from first principles, in the same StellarModel form as tables
// read from files (physics.md section 6). All results are cgs.
//
// Lane–Emden equation (polytrope of index n, 0 <= n < 5):
//     theta'' + (2/x) theta' + theta^n = 0,   theta(0) = 1, theta'(0) = 0,
// with rho = rho_c theta^n, P = P_c theta^(n+1), r = a x, a = R / x1 (x1 the first zero).
// It is integrated with Boost.Odeint (controlled Runge–Kutta–Fehlberg 7(8), absolute and
// relative tolerance 1e-13) from the series start
//     theta = 1 - x^2/6 + n x^4/120 - n(8n-5) x^6/15120 + O(x^8)   at x0 = 0.01.
// Near the surface (once theta < 0.5) the independent variable becomes theta itself:
//     dx/dtheta = 1/theta',  dtheta'/dtheta = -2/x - theta^n / theta',
// integrated down to theta = 0 exactly (controlled Dormand–Prince 5(4), tolerance 1e-14),
// so x1 and theta'(x1) come out of an ODE solve instead of a root search (theta' < 0 there for every n < 5, so the change is regular).
// theta^n is evaluated as max(theta, 0)^n, which is safe for non-integer n and equals 1 for
// n = 0 (theta never goes below 0 on the integrated range; the clamp only guards round-off).
// (The theta-form uses Dormand–Prince, not Fehlberg 7(8): near theta = 0 it is
// quadrature-like with the non-smooth term theta^n, where the Fehlberg pair's error estimate
// fails; for n = 0.5 it gave theta'(x1) wrong by 6e-8 relative, caught by the SciPy check.)
//
// Model quantities (derived from the Lane–Emden solution, exact relations):
//     rho_c / rho_bar = -x1 / (3 theta'(x1)),
//     m(r) / M        = x^2 theta'(x) / (x1^2 theta'(x1)),
//     P_c             = G M^2 / (4 pi (n+1) theta'(x1)^2 R^4).
//
// Mesh rule (every generator): points i = 0..N-1 at
//     r_i / R = s - (a/(2 pi)) sin(2 pi s),   s = i/(N-1),   a = 1/2,
// i.e. uniform in s, with spacing dr = (1 - a cos 2 pi s) R ds: half the mean spacing at the
// centre and at the surface, 1.5 times the mean in the middle, changing smoothly (no jump in
// spacing anywhere). r_0 = 0 and r_{N-1} = R exactly; P = 0 at R (and rho = 0 at R when
// n > 0). Because the mesh is a smooth map of a uniform one, a linear-finite-element solver
// that uses these points as nodes converges as O(h^2) and Richardson extrapolation between
// the mesh and its every-other-node subset applies.

#include "radmode/model.hpp"

#include <cstddef>
#include <vector>

namespace radmode {

/// Options shared by all generators. validate() throws UsageError naming the option (with its
/// command-line flag), the value and the allowed range.
struct GeneratorOptions {
  double mass_msun = 1;        ///< total mass M [M_sun]; 1e-3 <= M <= 1e4 (--mass)
  double radius_rsun = 1;      ///< radius R [R_sun]; 1e-6 <= R <= 1e5 (--radius)
  std::size_t points = 2000;   ///< number of points, centre and surface included;
                               ///< StellarModel::min_points .. 1e7 (--points)
  double gamma1 = 5.0 / 3.0;   ///< constant Gamma1 (polytrope, uniform); 1 < Gamma1 <= 10
                               ///< (--gamma1). Values below 4/3 are allowed on purpose: they
                               ///< make dynamically unstable test models.
  double mu = 0.61;            ///< mean molecular weight (standard model); 0.2 <= mu <= 4 (--mu)

  void validate() const;
};

/// Largest polytropic index accepted by make_polytrope: x1 diverges as n -> 5 and beyond
/// n = 4.9 the mass sits in a core too small for a radius mesh of a few thousand points.
inline constexpr double max_polytrope_index = 4.9;

/// Lane–Emden solution of index n.
struct LaneEmdenSolution {
  double n = 0;
  double x1 = 0;                     ///< first zero of theta
  double dtheta_x1 = 0;              ///< theta'(x1) (< 0)
  double mass_constant = 0;          ///< -x1^2 theta'(x1)
  double central_condensation = 0;   ///< rho_c / rho_bar = -x1 / (3 theta'(x1))
  std::vector<double> x;             ///< requested mesh, x = q x1
  std::vector<double> theta;         ///< theta(x) (exactly 0 at x1)
  std::vector<double> dtheta;        ///< theta'(x)
};

/// Solves the Lane–Emden equation for 0 <= n <= max_polytrope_index and samples theta and
/// theta' at x = q x1 for each q in `q` (each 0 <= q <= 1, non-decreasing; may be empty).
/// Throws UsageError for n or q out of range, Error(numerical) if the integration fails.
LaneEmdenSolution solve_lane_emden(double n, const std::vector<double>& q = {});

/// The mesh rule above: N values of r/R, 0 first and 1 last. N >= 2.
std::vector<double> stretched_mesh(std::size_t points);

/// Polytrope of index n (0 <= n <= max_polytrope_index) with constant Gamma1 =
/// options.gamma1. Columns r m P rho Gamma1. Metadata records the generator, n, Gamma1,
/// M, R, N, x1, -x1^2 theta'(x1), rho_c/rho_bar, rho_c, P_c.
StellarModel make_polytrope(double n, const GeneratorOptions& options = {});

/// Uniform-density sphere (n = 0), analytic: rho = rho_bar, m = M (r/R)^3,
/// P = (2 pi / 3) G rho_bar^2 R^2 (1 - (r/R)^2), constant Gamma1 = options.gamma1.
StellarModel make_uniform(const GeneratorOptions& options = {});

// --- Eddington standard model ------------------------------------------------------------
//
// An n = 3 polytrope in which the ratio beta = P_gas / P is the same everywhere, for an ideal
// monatomic gas (P_gas = rho k T / (mu m_u), u_gas = (3/2) P_gas / rho) plus black-body
// radiation (P_rad = a T^4 / 3, u_rad = 3 P_rad / rho). Since P_rad = (1 - beta) P,
//     P = K rho^(4/3),   K^3 = (3/a) (k / (mu m_u))^4 (1 - beta) / beta^4,
// and the n = 3 mass relation M = 4 pi (K / (pi G))^(3/2) (-x1^2 theta'(x1)) gives
// Eddington's quartic
//     1 - beta = C (M / M_sun)^2 mu^4 beta^4,
//     C = a pi G^3 M_sun^2 m_u^4 / (48 k^4 (x1^2 theta'(x1))^2)   (about 0.00299).
// f(beta) = C' beta^4 + beta - 1 is increasing on [0, 1] with f(0) = -1 < 0 <= f(1), so the
// root in (0, 1] is unique; it is found by bisection.
//
// Gamma1 (Chandrasekhar 1939, An Introduction to the Study of Stellar Structure, ch. II):
//     Gamma1 = (32 - 24 beta - 3 beta^2) / (24 - 21 beta).
// nabla_ad = (d ln T / d ln P)_s, derived here from the first law du + P d(1/rho) = 0 with the
// u and P above at fixed composition:
//     nabla_ad = 2 (4 - 3 beta) / (32 - 24 beta - 3 beta^2)
// (2/5 for beta = 1, 1/4 for beta -> 0; the same expression follows from the gas + radiation
// formula in Kippenhahn & Weigert, Stellar Structure and Evolution, ch. 13, after
// simplification). The test checks it against a numerical adiabat of the same EOS.

/// Eddington's quartic coefficient C above, from constants.hpp and the n = 3 Lane–Emden
/// solution.
double eddington_quartic_coefficient();

/// beta in (0, 1] solving 1 - beta = C (M/M_sun)^2 mu^4 beta^4. Throws UsageError for
/// non-positive or non-finite mass_msun or mu.
double eddington_beta(double mass_msun, double mu);

/// Gamma1 of an ideal monatomic gas plus radiation with gas-pressure fraction beta (0, 1].
double gamma1_gas_radiation(double beta);

/// nabla_ad of an ideal monatomic gas plus radiation with gas-pressure fraction beta (0, 1].
double nabla_ad_gas_radiation(double beta);

/// Eddington standard model of mass options.mass_msun, radius options.radius_rsun and mean
/// molecular weight options.mu (options.gamma1 is ignored: Gamma1 follows from beta).
/// Columns r m P rho Gamma1 T nabla_ad u with
///     T = beta mu m_u P / (rho k),   u = (3/2 beta + 3 (1 - beta)) P / rho
/// (both computed from P/rho = (P_c/rho_c) theta, so T = u = 0 at the surface).
StellarModel make_standard_model(const GeneratorOptions& options = {});

} // namespace radmode
