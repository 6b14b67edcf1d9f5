#include "radmode/shooting.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/structure.hpp"

#include <boost/numeric/odeint.hpp>

#include <algorithm>
#include <array>
#include <cmath>
#include <iterator>
#include <memory>
#include <sstream>

namespace radmode {

namespace {

using State = std::array<double, 2>; // (xi, p)

std::string num(double x) {
  std::ostringstream s;
  s.precision(6);
  s << x;
  return s.str();
}

/// The first-order system in t = ln x on one piece of the structure.
struct Lawe {
  const ShootingProblem* problem;
  double sigma2;
  std::size_t piece;
  void operator()(const State& y, State& dydt, double t) const {
    const double x = std::exp(t);
    const LaweCoefficients c = problem->coefficients(x, piece);
    dydt[0] = -3.0 * y[0] - y[1] / c.gamma1;
    dydt[1] = c.Vp * y[1] + c.V * (4.0 + sigma2 * c.x3_over_q) * y[0];
  }
};

/// Sign changes of xi along one integration, with the sign of its last value.
struct NodeTrack {
  int changes = 0;
  int first_sign = 0; ///< sign of the first non-zero xi
  int last_sign = 0;  ///< sign of the last non-zero xi
  void see(double xi) {
    const int s = xi > 0 ? 1 : (xi < 0 ? -1 : 0);
    if (s == 0) return;
    if (first_sign == 0) first_sign = s;
    if (last_sign != 0 && s != last_sign) ++changes;
    last_sign = s;
  }
};

struct Piece {
  State y{};
  NodeTrack nodes;
  bool ok = true;
  std::string message;
};

constexpr long max_steps_per_piece = 200000;

/// Integrates y from x_from to x_to (either direction), restarting at every break.
void integrate(const ShootingProblem& problem, double sigma2, double tol, double x_from,
               double x_to, Piece& piece) {
  namespace odeint = boost::numeric::odeint;
  const double dir = x_to > x_from ? 1.0 : -1.0;
  const double lo = std::min(x_from, x_to), hi = std::max(x_from, x_to);
  const auto& breaks = problem.breaks;
  // Break indices strictly inside (lo, hi), in the order they are crossed.
  const auto first = static_cast<std::size_t>(
      std::upper_bound(breaks.begin(), breaks.end(), lo) - breaks.begin());
  const auto last = static_cast<std::size_t>(
      std::lower_bound(breaks.begin(), breaks.end(), hi) - breaks.begin());
  std::vector<std::size_t> crossed;
  for (std::size_t j = first; j < last; ++j) crossed.push_back(j);
  if (dir < 0) std::reverse(crossed.begin(), crossed.end());
  std::vector<double> stops{x_from};
  for (std::size_t j : crossed) stops.push_back(breaks[j]);
  stops.push_back(x_to);
  double dt_carry = 1e-3;
  piece.nodes.see(piece.y[0]);
  for (std::size_t k = 0; k + 1 < stops.size(); ++k) {
    if (k > 0) {
      // Crossing break j: delta P continuous, so p changes by the pressure ratio.
      const std::size_t j = crossed[k - 1];
      if (j < problem.pressure_jump.size())
        piece.y[1] = dir > 0 ? piece.y[1] * problem.pressure_jump[j]
                             : piece.y[1] / problem.pressure_jump[j];
    }
    const double a = stops[k], b = stops[k + 1];
    const double left = std::min(a, b);
    const auto index = static_cast<std::size_t>(
        std::upper_bound(breaks.begin(), breaks.end(), left) - breaks.begin());
    Lawe system{&problem, sigma2, index};
    auto stepper = odeint::make_controlled(tol, tol, odeint::runge_kutta_dopri5<State>());
    double t = std::log(a);
    const double t_end = std::log(b);
    double dt = dir * std::min(dt_carry, std::abs(t_end - t));
    const double t_eps = 1e-13 * std::max(1.0, std::abs(t_end));
    long steps = 0, fails = 0;
    while (dir * (t_end - t) > t_eps) {
      // Never step past the stop; absorb a sliver left before it into this step.
      if (dir * (t + dt - t_end) > -t_eps) dt = t_end - t;
      else dt_carry = std::abs(dt);
      const double t_before = t;
      const auto result = stepper.try_step(system, piece.y, t, dt);
      if (result == odeint::success) {
        ++steps;
        if (!std::isfinite(piece.y[0]) || !std::isfinite(piece.y[1])) {
          piece.ok = false;
          piece.message = "non-finite solution at r/R = " + num(std::exp(t_before));
          return;
        }
        piece.nodes.see(piece.y[0]);
        // The system is linear: rescale to keep the numbers moderate (signs are kept).
        const double big = std::max(std::abs(piece.y[0]), std::abs(piece.y[1]));
        if (big > 1e100 || (big < 1e-100 && big > 0)) {
          piece.y[0] /= big;
          piece.y[1] /= big;
          stepper.initialize(system, piece.y, t);
        }
      } else {
        ++fails;
      }
      if (steps + fails > max_steps_per_piece ||
          std::abs(dt) < 1e-15 * std::max(1.0, std::abs(t))) {
        piece.ok = false;
        piece.message = "step size collapsed near r/R = " + num(std::exp(t)) +
                        " (coefficients not smooth, or tolerance too tight)";
        return;
      }
    }
  }
}

struct Evaluation {
  double D = 0;   ///< normalized mismatch
  int nodes = -1; ///< sign changes of xi in 0 < r < R (combined solution)
  bool ok = true;
  std::string message;
};

double centre_start(double tol) { return std::min(1e-3, 0.1 * std::pow(tol, 0.25)); }

Evaluation evaluate(const ShootingProblem& problem, double sigma2, double x_match,
                    const ShootOptions& options, double tol) {
  Evaluation ev;
  // Inner solution.
  Piece in;
  double x_start = problem.x_inner;
  if (options.inner == InnerCondition::rigid && problem.x_inner > 0.0) {
    in.y = {0.0, 1.0};
  } else if (problem.x_inner > 0.0) {
    // The structure has no centre; regularity is imposed at its innermost point (first order).
    const LaweCoefficients c = problem.coefficients(x_start, 0);
    in.y = {1.0, -3.0 * c.gamma1};
  } else {
    x_start = std::min(centre_start(tol), 0.5 * x_match);
    if (!problem.breaks.empty()) x_start = std::min(x_start, problem.breaks.front());
    const LaweCoefficients c = problem.coefficients(x_start, 0);
    const double V2 = c.V / (x_start * x_start);
    const double s = sigma2 * c.x3_over_q;
    const double b = 0.5 * V2 * (4.0 + s - 3.0 * c.gamma1);
    const double a = -b / (5.0 * c.gamma1);
    const double x2 = x_start * x_start;
    in.y = {1.0 + a * x2, -3.0 * c.gamma1 + b * x2};
  }
  integrate(problem, sigma2, tol, x_start, x_match, in);

  // Outer solution.
  Piece out;
  {
    const LaweCoefficients c = problem.coefficients(problem.x_surface, problem.breaks.size());
    if (options.surface == SurfaceCondition::fixed_pressure && !problem.singular_surface)
      out.y = {1.0, 0.0};
    else if (problem.singular_surface)
      out.y = {1.0, -(c.V / c.Vp) * (4.0 + sigma2 * c.x3_over_q)}; // regular solution
    else
      out.y = {1.0, -(4.0 + sigma2 * c.x3_over_q)};
  }
  integrate(problem, sigma2, tol, problem.x_surface, x_match, out);

  if (!in.ok || !out.ok) {
    ev.ok = false;
    ev.message = !in.ok ? "inner integration: " + in.message : "outer integration: " + out.message;
    return ev;
  }
  const double n_in = std::hypot(in.y[0], in.y[1]);
  const double n_out = std::hypot(out.y[0], out.y[1]);
  if (!(n_in > 0) || !(n_out > 0)) {
    ev.ok = false;
    ev.message = "solution vanished at the matching point";
    return ev;
  }
  ev.D = (in.y[0] * out.y[1] - out.y[0] * in.y[1]) / (n_in * n_out);
  // Nodes: inner sign changes + outer sign changes + one more if the signs disagree at the
  // junction once the outer solution is scaled onto the inner one.
  const double scale = in.y[0] * out.y[0] + in.y[1] * out.y[1];
  const int scale_sign = scale >= 0 ? 1 : -1;
  ev.nodes = in.nodes.changes + out.nodes.changes;
  if (in.nodes.last_sign != 0 && out.nodes.last_sign != 0 &&
      in.nodes.last_sign != scale_sign * out.nodes.last_sign)
    ++ev.nodes;
  return ev;
}

double matching_point(const ShootingProblem& problem, double frac, std::string& note) {
  double x = frac;
  if (!(x > problem.x_inner && x < problem.x_surface)) {
    x = 0.5 * (problem.x_inner + problem.x_surface);
    note = "matching radius r/R = " + num(frac) + " lies outside the model; using " + num(x);
  }
  return x; // may sit on a break: both integrations then simply stop there
}

struct Root {
  bool converged = false;
  double sigma2 = 0;
  double width = 0;
  double D = 0;
  int nodes = -1;
  int iterations = 0;
  std::string message;
};

int sign_of(double v) { return v > 0 ? 1 : (v < 0 ? -1 : 0); }

/// Bracket the root of D nearest the guess, then Illinois regula falsi inside the bracket.
Root find_root(const ShootingProblem& problem, double guess, double x_match,
               const ShootOptions& options, double tol) {
  Root root;
  const double scale = std::max(std::abs(guess), 1.0);
  auto f = [&](double s2, Evaluation& ev) {
    ++root.iterations;
    ev = evaluate(problem, s2, x_match, options, tol);
    return ev.ok;
  };
  Evaluation e0;
  if (!f(guess, e0)) {
    root.message = e0.message;
    return root;
  }
  if (e0.D == 0.0) {
    root = {true, guess, 0.0, 0.0, e0.nodes, root.iterations, {}};
    return root;
  }
  // Bracket: expanding steps on both sides, nearest sign change first.
  double a = 0, b = 0, fa = 0, fb = 0;
  bool bracketed = false;
  double prev_hi = guess, prev_lo = guess, f_prev_hi = e0.D, f_prev_lo = e0.D;
  double h = 1e-6 * scale, reach = 0;
  for (; h <= 1.0 * scale && root.iterations < options.max_iterations; h *= 2.0) {
    reach = h;
    Evaluation ep, em;
    if (!f(guess + h, ep) || !f(guess - h, em)) {
      root.message = !ep.ok ? ep.message : em.message;
      return root;
    }
    const bool up = sign_of(ep.D) != sign_of(f_prev_hi);
    const bool down = sign_of(em.D) != sign_of(f_prev_lo);
    if (up && down) {
      // Both sides changed sign: take the side whose secant root is nearer the guess.
      const double r_up = prev_hi - f_prev_hi * (guess + h - prev_hi) / (ep.D - f_prev_hi);
      const double r_dn = prev_lo - f_prev_lo * (guess - h - prev_lo) / (em.D - f_prev_lo);
      if (std::abs(r_up - guess) <= std::abs(r_dn - guess)) {
        a = prev_hi, fa = f_prev_hi, b = guess + h, fb = ep.D;
      } else {
        a = guess - h, fa = em.D, b = prev_lo, fb = f_prev_lo;
      }
      bracketed = true;
    } else if (up) {
      a = prev_hi, fa = f_prev_hi, b = guess + h, fb = ep.D;
      bracketed = true;
    } else if (down) {
      a = guess - h, fa = em.D, b = prev_lo, fb = f_prev_lo;
      bracketed = true;
    }
    if (bracketed) break;
    prev_hi = guess + h, f_prev_hi = ep.D;
    prev_lo = guess - h, f_prev_lo = em.D;
  }
  if (!bracketed) {
    root.message = "no eigenvalue found within sigma^2 = " + num(guess) + " +- " + num(reach) +
                   " (mismatch does not change sign)";
    return root;
  }
  // Illinois regula falsi; bisection when the bracket does not shrink fast enough.
  const double target = std::max(1e-14, 1e-2 * tol) * std::max(std::max(std::abs(a), std::abs(b)), 1.0);
  int side = 0;
  Evaluation ec;
  double c = 0.5 * (a + b);
  while (std::abs(b - a) > target) {
    if (root.iterations >= options.max_iterations) {
      root.message = "root finder reached max_iterations = " +
                     std::to_string(options.max_iterations) + " with bracket width " +
                     num(std::abs(b - a));
      root.sigma2 = c;
      root.width = std::abs(b - a);
      return root;
    }
    const double width_before = std::abs(b - a);
    c = (a * fb - b * fa) / (fb - fa);
    if (!(c > std::min(a, b) && c < std::max(a, b))) c = 0.5 * (a + b);
    if (!f(c, ec)) {
      root.message = ec.message;
      return root;
    }
    if (ec.D == 0.0) {
      a = b = c;
      break;
    }
    if (sign_of(ec.D) == sign_of(fb)) {
      b = c, fb = ec.D;
      if (side == -1) fa *= 0.5;
      side = -1;
    } else {
      a = c, fa = ec.D;
      if (side == 1) fb *= 0.5;
      side = 1;
    }
    if (std::abs(b - a) > 0.5 * width_before && std::abs(b - a) > target) {
      // Slow progress: one bisection step.
      const double m = 0.5 * (a + b);
      Evaluation em;
      if (!f(m, em)) {
        root.message = em.message;
        return root;
      }
      if (sign_of(em.D) == sign_of(fb)) {
        b = m, fb = em.D;
      } else {
        a = m, fa = em.D;
      }
      side = 0;
    }
  }
  root.sigma2 = std::abs(fa) < std::abs(fb) ? a : b;
  root.width = std::abs(b - a);
  Evaluation final_eval;
  if (!f(root.sigma2, final_eval)) {
    root.message = final_eval.message;
    return root;
  }
  root.D = final_eval.D;
  root.nodes = final_eval.nodes;
  root.converged = true;
  return root;
}

ShootResult shoot_checked(const ShootingProblem& problem, double sigma2_guess,
                          const ShootOptions& options) {
  ShootResult result;
  std::string note;
  const double x_match = matching_point(problem, options.match_r_frac, note);
  const Root tight = find_root(problem, sigma2_guess, x_match, options, options.rel_tol);
  result.iterations = tight.iterations;
  result.sigma2 = tight.sigma2;
  result.omega2 = tight.sigma2; // dimensionless problem: omega2 in units of GM/R^3
  result.nodes = tight.nodes;
  result.mismatch = std::abs(tight.D);
  if (!tight.converged) {
    result.message = tight.message;
    if (!note.empty()) result.message += "; " + note;
    return result;
  }
  // Error estimate from solves at 10x and 100x looser tolerances: the larger of the two
  // successive differences. With a regular method either overestimates the error of the tight
  // value; taking both guards against a difference that is small by accident (seen when the
  // number of steps per table interval changes between tolerances).
  double spread = 0, spread_ref = tight.sigma2;
  for (double factor : {10.0, 100.0}) {
    const double loose_tol = std::min(1e-3, factor * options.rel_tol);
    const Root loose = find_root(problem, tight.sigma2, x_match, options, loose_tol);
    result.iterations += loose.iterations;
    if (!loose.converged) {
      // Without an error estimate the value cannot be trusted: report it as not converged.
      result.message = "no error estimate: the solve at tolerance " + num(loose_tol) +
                       " failed (" + loose.message + ")";
      if (!note.empty()) result.message += "; " + note;
      return result;
    }
    spread = std::max(spread, std::abs(loose.sigma2 - spread_ref)); // vs the previous tolerance
    spread_ref = loose.sigma2;
  }
  const double floor = options.rel_tol * std::max(std::abs(tight.sigma2), 1.0);
  result.error_estimate = spread + tight.width + floor;
  result.converged = true;
  result.message = note;
  return result;
}

} // namespace

void ShootOptions::validate() const {
  if (!(rel_tol >= 1e-14 && rel_tol <= 1e-3))
    throw UsageError("shooting rel_tol = " + num(rel_tol) + ": expected 1e-14 .. 1e-3");
  if (!(match_r_frac > 0.0 && match_r_frac < 1.0))
    throw UsageError("shooting match_r_frac = " + num(match_r_frac) +
                     ": expected a fraction of the radius in (0, 1)");
  if (max_iterations < 5 || max_iterations > 10000)
    throw UsageError("shooting max_iterations = " + std::to_string(max_iterations) +
                     ": expected 5 .. 10000");
  if (!(agree_factor >= 1.0 && agree_factor <= 1e6))
    throw UsageError("shooting agree_factor = " + num(agree_factor) + ": expected 1 .. 1e6");
}

ShootResult shoot_sigma2(const ShootingProblem& problem, double sigma2_guess,
                         const ShootOptions& options) {
  options.validate();
  ShootResult result;
  if (!problem.coefficients || !(problem.x_surface > problem.x_inner) ||
      !(problem.x_inner >= 0.0) || !std::isfinite(sigma2_guess)) {
    result.message = "invalid shooting problem or non-finite starting value";
    return result;
  }
  try {
    return shoot_checked(problem, sigma2_guess, options);
  } catch (const Error& e) {
    // E.g. a coefficient requested outside the structure: a numerical outcome, not bad input.
    result.message = std::string("shooting failed: ") + e.what();
    return result;
  }
}


ShootingProblem shooting_problem(const StellarModel& model, const ShootOptions& options) {
  options.validate();
  auto structure = std::make_shared<const Structure>(model, options.inner);
  const std::vector<double>& node_r = structure->node_r();
  const double R = structure->radius();
  const double M = structure->mass();
  const std::size_t n_iv = structure->interval_count();

  ShootingProblem problem;
  problem.x_inner = node_r.front() / R;
  // Every interior node is a break; piece i is table interval i.
  for (std::size_t i = 1; i < n_iv; ++i) {
    problem.breaks.push_back(node_r[i] / R);
    problem.pressure_jump.push_back(structure->at(i - 1, 1.0).P / structure->at(i, 0.0).P);
  }
  problem.singular_surface = !(structure->surface_pressure() > 0.0);
  if (problem.singular_surface) {
    const double last_interval = (R - node_r[n_iv - 1]) / R;
    problem.x_surface = 1.0 - std::min(1e-7, 1e-3 * last_interval);
  }
  const bool centre = problem.x_inner == 0.0;
  const double r1 = node_r[1];
  const double m1 = structure->at(0, 1.0).m;
  problem.coefficients = [structure, R, M, centre, r1, m1](double x, std::size_t piece) {
    const double r = x * R;
    const std::vector<double>& nr = structure->node_r();
    const double r0 = nr[piece], r1_piece = nr[piece + 1];
    const double t = std::clamp((r - r0) / (r1_piece - r0), 0.0, 1.0);
    const StructurePoint p = structure->at(piece, t);
    LaweCoefficients c;
    c.gamma1 = p.gamma1;
    if (centre && piece == 0) {
      // Regular centre (see shooting.hpp): m ~ r^3 and hydrostatic Vp = V.
      const double m = m1 * (r / r1) * (r / r1) * (r / r1);
      c.V = constants::G * m * p.rho / (r * p.P);
      c.Vp = c.V;
      c.x3_over_q = x * x * x * M / m;
      return c;
    }
    c.V = constants::G * p.m * p.rho / (r * p.P);
    // -dlnP/dlnr of the structure's own interpolant of P (structure.hpp).
    c.Vp = -r * p.dP_dr / p.P;
    c.x3_over_q = x * x * x * M / p.m;
    return c;
  };
  return problem;
}

ShootResult shoot_mode(const StellarModel& model, double omega2_guess,
                       const ShootOptions& options) {
  const ShootingProblem problem = shooting_problem(model, options);
  const double unit = constants::G * model.mass() / std::pow(model.radius(), 3); // GM/R^3 [s^-2]
  ShootResult r = shoot_sigma2(problem, omega2_guess / unit, options);
  r.omega2 = r.sigma2 * unit;
  r.error_estimate *= unit;
  return r;
}

std::vector<VerifyResult> verify_modes(const StellarModel& model, const ModeSet& modes,
                                       const ShootOptions& options) {
  const ShootingProblem problem = shooting_problem(model, options);
  const double unit = constants::G * model.mass() / std::pow(model.radius(), 3); // [s^-2]
  std::vector<VerifyResult> out;
  out.reserve(modes.modes.size());
  for (const ModeSolution& mode : modes.modes) {
    VerifyResult v;
    v.order = mode.order;
    v.omega2_fe = mode.omega2;
    v.shoot = shoot_sigma2(problem, mode.omega2 / unit, options);
    v.shoot.omega2 = v.shoot.sigma2 * unit;
    v.shoot.error_estimate *= unit;
    v.omega2_shoot = v.shoot.converged ? v.shoot.omega2 : mode.omega2;
    v.abs_diff = std::abs(v.omega2_shoot - v.omega2_fe);
    v.rel_diff = v.abs_diff / std::max(std::abs(v.omega2_fe), 1e-6 * unit);
    v.tolerance = options.agree_factor * (mode.error_estimate + v.shoot.error_estimate) +
                  1e-9 * (std::abs(v.omega2_fe) + unit);
    v.nodes_agree = v.shoot.converged && v.shoot.nodes == mode.order;
    v.agrees = v.shoot.converged && v.abs_diff <= v.tolerance && v.nodes_agree;
    out.push_back(std::move(v));
  }
  return out;
}

} // namespace radmode
