#pragma once
// Reference polytropes built inside the tests (independent of the library's generators):
// Lane-Emden polytropes (fixed-step RK4 in x with
// h = 1e-4, cubic Hermite resampling), on a mesh uniform in r, centre and surface included.
#include "radmode/model.hpp"

#include <cstddef>

namespace radmode::test {

/// Polytrope of index 0 < n < 5: rho = rho_c theta^n, P = P_c theta^(n+1),
/// P_c = G M^2 / (4 pi (n+1) theta'(x1)^2 R^4), m = M x^2 theta'(x) / (x1^2 theta'(x1)).
StellarModel polytrope_model(double n, std::size_t points, double mass_g, double radius_cm,
                             double gamma1);

} // namespace radmode::test
