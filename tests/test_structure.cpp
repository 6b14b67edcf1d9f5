// Prepared, interpolable equilibrium model (include/radmode/structure.hpp).
#include "radmode/structure.hpp"

#include "analytic_models.hpp"
#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/generators.hpp"
#include "../src/exp_function.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstring>
#include <iterator>
#include <limits>
#include <vector>

using namespace radmode;

TEST_CASE("centre extension adds r = 0 with the uniform-core central pressure") {
  // Uniform-density sphere, P = (2 pi/3) G rho^2 R^2 (1 - x^2) (physics.md §6): cutting it at
  // x0 and re-extending with a uniform core of the innermost density must give back its
  // analytic central pressure (the extension rule is exact for this model).
  const auto model = test::uniform_sphere(test::uniform_mesh(50, 0.1), 5.0 / 3.0);
  Structure s(model, InnerCondition::centre);
  CHECK(s.extended_centre());
  CHECK(s.node_r().front() == 0.0);
  CHECK(s.node_r().size() == model.size() + 1);
  const double R = model.radius(), rho = model.rho[0];
  const double Pc = (2.0 * constants::pi / 3.0) * constants::G * rho * rho * R * R;
  const auto c = s.at_radius(0.0);
  CHECK(c.P == doctest::Approx(Pc).epsilon(1e-14));
  CHECK(c.m == 0.0);
  CHECK(c.rho == rho);
  CHECK(c.gamma1 == 5.0 / 3.0);
  CHECK(s.table().size() == model.size() + 1);
  CHECK(s.mass() == model.mass());
  CHECK(s.radius() == R);
}

TEST_CASE("rigid inner boundary keeps an envelope as it is") {
  const auto model = test::uniform_sphere(test::uniform_mesh(50, 0.3), 5.0 / 3.0);
  Structure s(model, InnerCondition::rigid);
  CHECK_FALSE(s.extended_centre());
  CHECK(s.inner_radius() == model.r.front());
  CHECK(s.interval_count() == 50);
  CHECK_THROWS_AS(s.at_radius(0.5 * model.r.front()), Error);
}

TEST_CASE("cubic interpolation is exact for the uniform sphere, centre extension included") {
  // P = Pc (1 - x^2) and m = M x^3 are polynomials of degree <= 3 and rho is constant, so the
  // Hermite cubics with slopes from hydrostatic equilibrium and dm/dr = 4 pi r^2 rho
  // reproduce them exactly between the table points (physics.md §6 for the model).
  const auto model = test::uniform_sphere(test::uniform_mesh(20, 0.1), 5.0 / 3.0);
  const double R = model.radius(), M = model.mass(), rho = model.rho[0];
  const double Pc = (2.0 * constants::pi / 3.0) * constants::G * rho * rho * R * R;
  Structure s(model);
  std::size_t hint = 0;
  for (int k = 0; k <= 997; ++k) {
    const double x = k / 997.0;
    const auto p = s.at_radius(x * R, &hint);
    CHECK(p.P == doctest::Approx(Pc * (1 - x * x)).epsilon(1e-11).scale(Pc));
    CHECK(p.m == doctest::Approx(M * x * x * x).epsilon(1e-11).scale(M));
    CHECK(p.rho == doctest::Approx(rho).epsilon(1e-13));
  }
}

TEST_CASE("interpolation fallbacks: log-linear, linear to zero, linear Gamma1 and nabla_ad") {
  StellarModel m;
  for (int i = 0; i < 10; ++i) {
    const double x = i / 9.0;
    m.r.push_back(x);
    // m constant across interval 3: its cubic cannot be monotone -> linear.
    m.m.push_back(i == 4 ? m.m.back() : x * x * x + 1e-3 * i);
    // P growing outward contradicts hydrostatic equilibrium -> linear in log; 0 at the surface.
    m.P.push_back(i == 9 ? 0.0 : std::pow(10.0, i));
    m.rho.push_back(std::pow(2.0, -i)); // ln rho linear: the log cubic is the log-linear one
    m.gamma1.push_back(1.4 + 0.01 * i);
    m.nabla_ad.push_back(0.4 - 0.001 * i * i);
  }
  Structure s(m);
  CHECK_FALSE(s.extended_centre());
  CHECK(s.has_nabla_ad());
  const auto p = s.at(3, 0.5);
  CHECK(p.r == doctest::Approx(3.5 / 9.0));
  CHECK(p.P == doctest::Approx(std::sqrt(m.P[3] * m.P[4])).epsilon(1e-12));
  CHECK(p.rho == doctest::Approx(std::sqrt(m.rho[3] * m.rho[4])).epsilon(1e-12));
  CHECK(p.m == doctest::Approx(m.m[3]));
  CHECK(p.gamma1 == doctest::Approx(0.5 * (m.gamma1[3] + m.gamma1[4])));
  CHECK(p.nabla_ad == doctest::Approx(0.5 * (m.nabla_ad[3] + m.nabla_ad[4])));
  // Zero surface pressure: the cubic in P (not in log) with this table's tiny hydrostatic
  // slopes, i.e. the Hermite basis value h00(1/4) = 27/32 times P_8.
  const auto q = s.at(8, 0.25);
  CHECK(q.P == doctest::Approx(27.0 / 32.0 * m.P[8]).epsilon(1e-9));
  // Table rows are reproduced exactly at the interval ends.
  for (std::size_t i = 0; i < s.interval_count(); ++i) {
    CHECK(s.at(i, 0.0).P == m.P[i]);
    CHECK(s.at(i, 1.0).rho == m.rho[i + 1]);
  }
  CHECK(s.at_radius(1.0).P == 0.0);
}

TEST_CASE("repeated radius: one node, each side uses its own row, the outer side at r_d") {
  StellarModel m;
  const double xs[] = {0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0};
  int i = 0;
  for (const double x : xs) {
    const bool outer = x > 0.5 || (x == 0.5 && i == 6);
    m.r.push_back(x);
    m.m.push_back(x * x * x);
    m.P.push_back(1.0 - x * x);
    m.rho.push_back(outer ? 1.0 : 3.0);
    m.gamma1.push_back(outer ? 5.0 / 3.0 : 1.4);
    ++i;
  }
  Structure s(m);
  CHECK(s.node_r().size() == 11);
  CHECK(s.interval_count() == 10);
  CHECK(s.discontinuity()[5]);
  CHECK_FALSE(s.discontinuity()[4]);
  CHECK(s.at(4, 1.0).rho == 3.0);    // interval ending at r_d: inner row
  CHECK(s.at(5, 0.0).rho == 1.0);    // interval starting at r_d: outer row
  CHECK(s.at(4, 0.5).gamma1 == 1.4); // no mixing across the discontinuity
  CHECK(s.at_radius(0.5).rho == 1.0);
  CHECK(s.at_radius(0.4999).rho == doctest::Approx(3.0));
  CHECK(s.left_row(5) == 6);
}

TEST_CASE("interval_of: binary search and hints agree, marching outward and inward") {
  const auto model = test::uniform_sphere(test::uniform_mesh(200), 5.0 / 3.0);
  Structure s(model);
  std::size_t hint = 0;
  for (int k = 0; k <= 1000; ++k) {
    const double r = model.radius() * k / 1000.0;
    const std::size_t a = s.interval_of(r);
    const std::size_t b = s.interval_of(r, &hint);
    CHECK(a == b);
    CHECK(s.node_r()[a] <= r);
    CHECK((r < s.node_r()[a + 1] || a + 1 == s.interval_count()));
  }
  hint = 3; // a wrong hint far away still gives the right interval
  CHECK(s.interval_of(0.75 * model.radius(), &hint) == 150);
  CHECK(hint == 150);
  CHECK_THROWS_AS(s.interval_of(1.01 * model.radius()), Error);
}

TEST_CASE("an invalid model is rejected by the preparation") {
  auto model = test::uniform_sphere(test::uniform_mesh(20), 5.0 / 3.0);
  model.rho[4] = -1.0;
  CHECK_THROWS_AS(Structure{model}, InputError);
}

namespace {

/// A table with every interval shape: a discontinuity, a zero-density surface (power law to
/// zero), a zero surface pressure, log and linear cubics and a centre extension.
StellarModel every_shape_model() {
  StellarModel m;
  const double xs[] = {0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 1.0};
  for (std::size_t i = 0; i < std::size(xs); ++i) {
    const double x = xs[i];
    const bool outer = i >= 6;
    m.r.push_back(x);
    m.m.push_back(x * x * x);
    m.P.push_back(i + 1 == std::size(xs) ? 0.0 : (1.0 - x * x) * (1.0 - x * x));
    m.rho.push_back(i + 1 == std::size(xs) ? 0.0 : (outer ? 1.0 : 3.0) * (1.0 - x * x));
    m.gamma1.push_back(outer ? 5.0 / 3.0 : 1.4);
  }
  return m;
}

} // namespace

TEST_CASE("values_at: the values of at(), bit for bit, in every interval shape") {
  // Consistency of the two evaluation paths (values_at is the cheap one the form samplers
  // use). The table has a discontinuity, a zero-density surface (power law to zero), a zero
  // surface pressure, log and linear cubics and a centre extension.
  const Structure s(every_shape_model());
  REQUIRE(s.extended_centre());
  for (std::size_t i = 0; i < s.interval_count(); ++i)
    for (const double t : {0.0, 0.1127016653792583, 0.3, 0.5, 0.8872983346207417, 1.0}) {
      const StructurePoint p = s.at(i, t);
      const StructureValues v = s.values_at(i, t);
      CHECK(v.m == p.m);
      CHECK(v.P == p.P);
      CHECK(v.rho == p.rho);
      CHECK(v.gamma1 == p.gamma1);
    }
}

TEST_CASE("the many-point evaluations equal values_at bit for bit") {
  // values_at_rule (one rule in every interval) and log_values_at with values are faster
  // paths to the same numbers (the form and the interpolation-error estimate use them); exp
  // of log_values_at's logs gives values_at's values except at the table rows, where the logs
  // are the logs of the rows.
  GeneratorOptions g;
  g.points = 60;
  const StellarModel poly = make_polytrope(3.0, g);
  for (const StellarModel& model : {every_shape_model(), poly}) {
    const Structure s(model);
    const std::vector<double> rule = {0.0, 0.1127016653792583, 0.3, 0.5, 0.8872983346207417, 1.0};
    const std::size_t n = s.interval_count(), q = rule.size();
    std::vector<std::size_t> interval;
    std::vector<double> t;
    for (std::size_t i = 0; i < n; ++i)
      for (double tl : rule) interval.push_back(i), t.push_back(tl);
    std::vector<StructureValues> many(t.size()), by_rule(t.size()), logs(t.size());
    std::vector<unsigned char> flags(t.size());
    s.values_at_rule(0, n, rule.data(), q, by_rule.data());
    s.log_values_at(interval.data(), t.data(), t.size(), logs.data(), flags.data(), many.data());
    int log_P = 0, log_rho = 0;
    for (std::size_t k = 0; k < t.size(); ++k) {
      const StructureValues one = s.values_at(interval[k], t[k]);
      for (const StructureValues* v : {&many[k], &by_rule[k]}) {
        CHECK(v->m == one.m);
        CHECK(v->P == one.P);
        CHECK(v->rho == one.rho);
        CHECK(v->gamma1 == one.gamma1);
      }
      CHECK(logs[k].m == one.m);
      CHECK(logs[k].gamma1 == one.gamma1);
      const bool row = t[k] == 0.0 || t[k] == 1.0;
      // One quantity: its log where flagged (of the row at t = 0, 1), else its value.
      auto check = [&](double got, double value, bool flagged, int& flagged_count) {
        if (!flagged) {
          CHECK(got == value);
          return;
        }
        ++flagged_count;
        if (row) CHECK(got == std::log(value));
        else CHECK(std::exp(got) == value);
      };
      check(logs[k].P, one.P, flags[k] & Structure::log_P, log_P);
      check(logs[k].rho, one.rho, flags[k] & Structure::log_rho, log_rho);
    }
    CHECK(log_P > 0); // the log shapes were exercised
    CHECK(log_rho > 0);
  }
}

TEST_CASE("values_at_rule rejects a rule longer than its limit and a bad range") {
  const Structure s(every_shape_model());
  std::vector<double> rule(Structure::max_rule_points + 1, 0.5);
  std::vector<StructureValues> out(rule.size() * s.interval_count());
  CHECK_THROWS_AS(s.values_at_rule(0, s.interval_count(), rule.data(), rule.size(), out.data()),
                  UsageError);
  CHECK_THROWS_AS(s.values_at_rule(0, s.interval_count() + 1, rule.data(), 1, out.data()),
                  UsageError);
}

TEST_CASE("the structure's exponential is std::exp bit for bit") {
  // detail::exp_function() may bypass the C library's errno wrapper (src/exp_function.hpp);
  // the structure's values depend on it giving std::exp's results exactly. Arguments spread
  // over the whole range where exp is finite and nonzero, plus both ends and special values.
  const detail::ExpFunction exp = detail::exp_function();
  auto same = [](double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; };
  std::uint64_t state = 88172645463325252ull; // xorshift64
  std::size_t differ = 0;
  for (int i = 0; i < 1000000; ++i) {
    state ^= state << 13;
    state ^= state >> 7;
    state ^= state << 17;
    const double u = static_cast<double>(state >> 11) * 0x1p-53; // [0, 1)
    const double x = -750.0 + 1465.0 * u;
    differ += !same(exp(x), std::exp(x));
  }
  CHECK(differ == 0);
  for (const double x : {0.0, -0.0, 1e-320, -1e-320, 709.782712893384, 709.7827128933841,
                         -745.1332191019411, -745.1332191019412, 1e308, -1e308,
                         std::numeric_limits<double>::infinity(),
                         -std::numeric_limits<double>::infinity()}) {
    CAPTURE(x);
    CHECK(same(exp(x), std::exp(x)));
  }
  CHECK(std::isnan(exp(std::numeric_limits<double>::quiet_NaN())));
}
