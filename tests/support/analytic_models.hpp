#pragma once
// Equilibrium models with closed-form structure, built directly in the tests (no generator,
// no file): the uniform-density sphere (physics.md §6) sampled on a chosen mesh.
#include "radmode/discretize.hpp"
#include "radmode/model.hpp"

#include <cstddef>
#include <vector>

namespace radmode::test {

/// Uniform-density sphere of mass M [g] and radius R [cm], constant Gamma1, at the points
/// r_i = x_i R for x in `x` (0 <= x_i <= 1, increasing; x.front() may be > 0):
///   rho = 3M/(4 pi R^3), m = M x^3, P = (2 pi/3) G rho^2 R^2 (1 - x^2).
StellarModel uniform_sphere(const std::vector<double>& x, double gamma1, double mass_g = 1.989e33,
                            double radius_cm = 6.957e10);

/// The pencil of a model on its own mesh: regular surface, centre (no removed node).
TridiagonalPencil model_pencil(const StellarModel& model);

/// n + 1 points uniform in [x0, 1].
std::vector<double> uniform_mesh(std::size_t n_intervals, double x0 = 0.0);

} // namespace radmode::test
