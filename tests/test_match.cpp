// Observations, mode identification and the homology fit (include/radmode/match.hpp).
#include "radmode/match.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/generators.hpp"
#include "support.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <functional>
#include <random>
#include <string>
#include <vector>

using namespace radmode;

namespace {

/// Catches the expected exception and returns its kind and message.
template <class F> std::pair<ErrorKind, std::string> error_of(F&& f) {
  try {
    f();
  } catch (const Error& e) {
    return {e.kind(), e.what()};
  }
  FAIL("expected an exception");
  return {ErrorKind::usage, ""};
}

bool contains(const std::string& text, const std::string& part) {
  return text.find(part) != std::string::npos;
}

ModelPeriod mode(int order, double period_d, double sigma_d = 1e-7) {
  ModelPeriod m;
  m.order = order;
  m.period_d = period_d;
  m.sigma_d = sigma_d;
  m.usable = true;
  return m;
}

Observation obs(double period_d, double sigma_d, std::optional<int> label = std::nullopt) {
  Observation o;
  o.value = period_d;
  o.uncertainty = sigma_d;
  o.period_d = period_d;
  o.sigma_d = sigma_d;
  o.label = label;
  o.origin = "test";
  return o;
}

ObservationSet set_of(std::vector<Observation> items) {
  ObservationSet s;
  s.source = "test";
  s.items = std::move(items);
  return s;
}

/// Uniform-density sphere, Gamma1 = 5/3: sigma_k^2 = Gamma1 (k+1)(2k+3) - 4 (Sterne 1937,
/// MNRAS 97, 582). Periods in units of the fundamental's period times `unit_d`.
std::vector<ModelPeriod> sterne_modes(int count, double unit_d, double rel_sigma) {
  std::vector<ModelPeriod> out;
  const double g = 5.0 / 3.0;
  const double s0 = std::sqrt(g * 3.0 - 4.0);
  for (int k = 0; k < count; ++k) {
    const double sk = std::sqrt(g * (k + 1) * (2 * k + 3) - 4.0);
    out.push_back(mode(k, unit_d * s0 / sk, unit_d * s0 / sk * rel_sigma));
  }
  return out;
}

} // namespace

// ---- units ---------------------------------------------------------------------------------

TEST_CASE("units convert to days with the uncertainty propagated (hand-computed)") {
  // 12 h = 0.5 d; 0.24 h = 0.01 d.
  auto p = to_period_days(12.0, 0.24, ObservedUnit::hour);
  CHECK(p.period_d == doctest::Approx(0.5).epsilon(1e-15));
  CHECK(p.sigma_d == doctest::Approx(0.01).epsilon(1e-15));
  // 720 min = 0.5 d; 1.44 min = 0.001 d.
  p = to_period_days(720.0, 1.44, ObservedUnit::minute);
  CHECK(p.period_d == doctest::Approx(0.5).epsilon(1e-15));
  CHECK(p.sigma_d == doctest::Approx(0.001).epsilon(1e-15));
  // 43200 s = 0.5 d; 8.64 s = 1e-4 d.
  p = to_period_days(43200.0, 8.64, ObservedUnit::second);
  CHECK(p.period_d == doctest::Approx(0.5).epsilon(1e-15));
  CHECK(p.sigma_d == doctest::Approx(1e-4).epsilon(1e-15));
  // 2 c/d +- 0.02 c/d: P = 1/2 d, sigma_P = sigma_nu/nu^2 = 0.02/4 = 0.005 d.
  p = to_period_days(2.0, 0.02, ObservedUnit::cycles_per_day);
  CHECK(p.period_d == doctest::Approx(0.5).epsilon(1e-15));
  CHECK(p.sigma_d == doctest::Approx(0.005).epsilon(1e-15));
  // 10 uHz = 1e-5 Hz: P = 1e5 s = 1.1574074074 d; sigma 0.1 uHz -> 1 % of P = 1000 s.
  p = to_period_days(10.0, 0.1, ObservedUnit::micro_hertz);
  CHECK(p.period_d == doctest::Approx(1e5 / 86400.0).epsilon(1e-15));
  CHECK(p.sigma_d == doctest::Approx(1000.0 / 86400.0).epsilon(1e-13));
  // 1 c/d = 1/86400 Hz = 11.574074 uHz: both give one day.
  p = to_period_days(1e6 / 86400.0, 0.0, ObservedUnit::micro_hertz);
  CHECK(p.period_d == doctest::Approx(1.0).epsilon(1e-15));
}

TEST_CASE("unit tokens and labels") {
  CHECK(parse_observed_unit("uHz") == ObservedUnit::micro_hertz);
  CHECK(parse_observed_unit("\xC2\xB5Hz") == ObservedUnit::micro_hertz);
  CHECK(parse_observed_unit("c/d") == ObservedUnit::cycles_per_day);
  CHECK_FALSE(parse_observed_unit("Hz"));
  CHECK_FALSE(parse_observed_unit("days"));
  CHECK(parse_order_label("F") == 0);
  CHECK(parse_order_label("1O") == 1);
  CHECK(parse_order_label("12o") == 12);
  CHECK_FALSE(parse_order_label("0O"));
  CHECK_FALSE(parse_order_label("O"));
  CHECK_FALSE(parse_order_label("1X"));
  CHECK(mode_label(0) == "F");
  CHECK(mode_label(3) == "3O");
}

// ---- observation files ---------------------------------------------------------------------

TEST_CASE("observation file: comments, blank lines, star name, labels") {
  const std::string text = "# star = Invented Star\n"
                           "\n"
                           "0.5   d   0.001  F   # fundamental\n"
                           "  11.574074 uHz 0.01\n"
                           "3 c/d 0.003 2O\n";
  const auto set = parse_observations(text, "obs.txt");
  CHECK(set.star == "Invented Star");
  REQUIRE(set.items.size() == 3);
  CHECK(set.items[0].label == 0);
  CHECK(set.items[0].origin == "obs.txt:3");
  CHECK_FALSE(set.items[1].label);
  CHECK(set.items[1].period_d == doctest::Approx(1.0).epsilon(1e-7));
  CHECK(set.items[2].label == 2);
  CHECK(set.items[2].period_d == doctest::Approx(1.0 / 3.0));
  CHECK(set.items[2].sigma_d == doctest::Approx(0.003 / 9.0));
}

TEST_CASE("malformed observation lines name the file, the line and what was expected") {
  struct Case {
    std::string text;
    ErrorKind kind;
    std::string where;
    std::string says;
  };
  const std::vector<Case> cases = {
      {"0.5 d 0.001\n0.4 d\n", ErrorKind::bad_format, "bad.txt:2:", "3 or 4 fields"},
      {"0.5 d 0.001 F extra\n", ErrorKind::bad_format, "bad.txt:1:", "found 5 fields"},
      {"#c\nabc d 0.1\n", ErrorKind::bad_number, "bad.txt:2: column 1 (value)", "found 'abc'"},
      {"0.5 days 0.1\n", ErrorKind::bad_format, "bad.txt:1: column 2 (unit)", "found 'days'"},
      {"0.5 d 1e-3x\n", ErrorKind::bad_number, "column 3 (uncertainty)", "expected a number"},
      {"0.5 d nan\n", ErrorKind::not_finite, "column 3 (uncertainty)", "finite"},
      {"0.5 d 0\n", ErrorKind::bad_format, "column 3 (uncertainty)", "positive uncertainty"},
      {"-0.5 d 0.1\n", ErrorKind::bad_format, "column 1 (value)", "positive"},
      {"0.5 d 0.1 X\n", ErrorKind::bad_format, "column 4 (label)", "F, 1O, 2O"},
      {"# nothing\n\n", ErrorKind::bad_format, "bad.txt", "at least one"},
      {"0.5 d 0.1 F\n0.4 d 0.1 F\n", ErrorKind::bad_format, "bad.txt:1 and bad.txt:2",
       "one observation per mode"},
      {"0.5 d 0.1 1O\n0.4 d 0.1 F\n", ErrorKind::bad_format, "bad.txt:1 (1O) and bad.txt:2 (F)",
       "longer period"},
  };
  for (const auto& c : cases) {
    CAPTURE(c.text);
    const auto [kind, message] = error_of([&] { parse_observations(c.text, "bad.txt"); });
    CHECK(kind == c.kind);
    CHECK(contains(message, c.where));
    CHECK(contains(message, c.says));
  }
}

TEST_CASE("missing observation file is an io error naming the path") {
  test::TempDir dir;
  const auto path = dir.file("none.txt");
  const auto [kind, message] = error_of([&] { read_observations(path); });
  CHECK(kind == ErrorKind::io);
  CHECK(contains(message, path));
}

TEST_CASE("command-line observation tokens") {
  auto o = parse_observation_spec("0.5421d+-0.0001:F", "--period 1");
  CHECK(o.period_d == 0.5421);
  CHECK(o.sigma_d == 0.0001);
  CHECK(o.label == 0);
  o = parse_observation_spec("10uHz+-0.1", "--period 2");
  CHECK(o.period_d == doctest::Approx(1e5 / 86400.0));
  CHECK(o.sigma_d == doctest::Approx(0.01 * 1e5 / 86400.0));
  CHECK_FALSE(o.label);
  o = parse_observation_spec("2c/d+-0.02c/d:1O", "--period 3");
  CHECK(o.period_d == doctest::Approx(0.5));
  CHECK(o.label == 1);
  for (const std::string bad : {"0.5d", "0.5+-0.1", "0.5x+-0.1", "0.5d+-abc", "0.5d+-0.1h",
                                "0.5d+-0.1:Q", "0d+-0.1", "0.5d+--1"}) {
    CAPTURE(bad);
    const auto [kind, message] = error_of([&] { parse_observation_spec(bad, "--period 7"); });
    CHECK(kind == ErrorKind::usage);
    CHECK(contains(message, "--period 7"));
    CHECK(contains(message, "VALUE UNIT +- SIGMA"));
  }
}

// ---- model periods from a mode set ---------------------------------------------------------

TEST_CASE("model periods: P = 2 pi / omega, sigma_P / P = 1/2 sigma(omega^2) / omega^2") {
  ModeSet set;
  const double omega = 2 * constants::pi / constants::day_s; // one-day period
  ModeSolution a;
  a.order = 1;
  a.omega2 = omega * omega * 4.0; // half a day
  a.error_estimate = 2e-3 * a.omega2;
  a.trusted = true;
  ModeSolution b = a;
  b.order = 0;
  b.omega2 = omega * omega;
  b.error_estimate = 2e-3 * b.omega2;
  ModeSolution c = a;
  c.order = 2;
  c.omega2 = -omega * omega;
  ModeSolution d = a;
  d.order = 3;
  d.omega2 = omega * omega * 16.0;
  d.trusted = false;
  d.flag = "order disagrees with node count";
  ModeSolution e = a;
  e.order = 4;
  e.omega2 = omega * omega * 1e-6;
  e.error_estimate = 2.0 * e.omega2; // |omega^2| within its error: sign not established
  set.modes = {a, b, c, d, e};
  const auto periods = model_periods(set);
  REQUIRE(periods.size() == 5);
  CHECK(periods[0].order == 0);
  CHECK(periods[0].period_d == doctest::Approx(1.0).epsilon(1e-14));
  CHECK(periods[0].sigma_d == doctest::Approx(1e-3).epsilon(1e-12));
  CHECK(periods[1].period_d == doctest::Approx(0.5).epsilon(1e-14));
  CHECK(periods[1].sigma_d == doctest::Approx(0.5e-3).epsilon(1e-12));
  CHECK_FALSE(periods[2].usable);
  CHECK(contains(periods[2].why_not, "omega^2 <= 0"));
  CHECK_FALSE(periods[3].usable);
  CHECK(contains(periods[3].why_not, "order disagrees"));
  CHECK_FALSE(periods[4].usable);
  CHECK(contains(periods[4].why_not, "sign"));
}

// ---- mode identification -------------------------------------------------------------------

TEST_CASE("assignment: nearest modes, residuals and period ratios") {
  const std::vector<ModelPeriod> modes = {mode(0, 1.0), mode(1, 0.75), mode(2, 0.6), mode(3, 0.5)};
  const auto r = match_modes(set_of({obs(0.6002, 0.001), obs(0.7501, 0.001)}), modes);
  REQUIRE(r.status == MatchStatus::ok);
  CHECK(r.assignments[0].order == 2);
  CHECK(r.assignments[1].order == 1);
  CHECK(r.assignments[0].residual_sigma == doctest::Approx(0.2).epsilon(1e-3));
  CHECK(r.chi2 == doctest::Approx(0.04 + 0.01).epsilon(1e-3));
  REQUIRE(r.ratios.size() == 1);
  CHECK(r.ratios[0].order_long == 1);
  CHECK(r.ratios[0].order_short == 2);
  CHECK(r.ratios[0].observed == doctest::Approx(0.6002 / 0.7501));
  CHECK(r.ratios[0].model == doctest::Approx(0.8));
}

TEST_CASE("assignment is order preserving and one observation per mode, not greedy") {
  // Both observations lie nearest to 1O; greedy nearest-mode matching would give both 1O.
  const std::vector<ModelPeriod> modes = {mode(0, 1.0), mode(1, 0.75), mode(2, 0.6)};
  const auto r = match_modes(set_of({obs(0.74, 0.01), obs(0.77, 0.01)}), modes);
  REQUIRE(r.status == MatchStatus::ok);
  // Optimum: 0.77 -> F (23^2) + 0.74 -> 1O (1^2) = 530 vs 0.77 -> 1O (2^2) + 0.74 -> 2O
  // (14^2) = 200: the second wins and keeps the longer period on the lower order.
  CHECK(r.assignments[1].order == 1);
  CHECK(r.assignments[0].order == 2);
  CHECK(r.chi2 == doctest::Approx(200.0).epsilon(1e-6));
}

TEST_CASE("dynamic programming finds the same optimum as brute-force enumeration") {
  std::mt19937 rng(12345);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  for (int trial = 0; trial < 200; ++trial) {
    const int nm = 2 + static_cast<int>(u(rng) * 5);  // 2..6 modes
    const int no = 1 + static_cast<int>(u(rng) * nm); // 1..nm observations
    std::vector<ModelPeriod> modes;
    double p = 1.0;
    for (int k = 0; k < nm; ++k) {
      modes.push_back(mode(k, p, 0.01 * u(rng)));
      p *= 0.6 + 0.3 * u(rng);
    }
    std::vector<Observation> items;
    for (int i = 0; i < no; ++i) {
      auto o = obs(0.1 + 1.0 * u(rng), 0.005 + 0.05 * u(rng));
      if (u(rng) < 0.15) o.label = static_cast<int>(u(rng) * nm);
      items.push_back(o);
    }
    ObservationSet set = set_of(items);
    bool labels_ok = true;
    try {
      validate_observations(set);
    } catch (const Error&) {
      labels_ok = false;
    }
    if (!labels_ok) continue;
    // Brute force: every strictly increasing choice of orders for observations sorted by
    // decreasing period.
    std::vector<std::size_t> idx(items.size());
    for (std::size_t i = 0; i < idx.size(); ++i) idx[i] = i;
    std::stable_sort(idx.begin(), idx.end(),
                     [&](std::size_t a, std::size_t b) { return items[a].period_d > items[b].period_d; });
    double best = std::numeric_limits<double>::infinity();
    std::function<void(std::size_t, int, double)> rec = [&](std::size_t i, int next, double acc) {
      if (i == idx.size()) {
        best = std::min(best, acc);
        return;
      }
      for (int k = next; k < nm; ++k) {
        const auto& o = items[idx[i]];
        if (o.label && *o.label != k) continue;
        const double d = o.period_d - modes[static_cast<std::size_t>(k)].period_d;
        const double s2 = o.sigma_d * o.sigma_d + std::pow(modes[static_cast<std::size_t>(k)].sigma_d, 2);
        rec(i + 1, k + 1, acc + d * d / s2);
      }
    };
    rec(0, 0, 0.0);
    const auto r = match_modes(set, modes);
    CAPTURE(trial);
    if (std::isinf(best)) {
      CHECK(r.status == MatchStatus::no_assignment);
      continue;
    }
    REQUIRE(r.status == MatchStatus::ok);
    CHECK(r.chi2 == doctest::Approx(best).epsilon(1e-12));
    // Invariants of the returned assignment.
    for (std::size_t a = 0; a < items.size(); ++a) {
      if (items[a].label) CHECK(r.assignments[a].order == *items[a].label);
      for (std::size_t b = 0; b < items.size(); ++b) {
        if (a == b) continue;
        CHECK(r.assignments[a].order != r.assignments[b].order);
        if (items[a].period_d > items[b].period_d)
          CHECK(r.assignments[a].order < r.assignments[b].order);
      }
    }
  }
}

TEST_CASE("a labelled observation is never reassigned") {
  const std::vector<ModelPeriod> modes = {mode(0, 1.0), mode(1, 0.75), mode(2, 0.6)};
  // 0.99 d sits on F but is labelled 1O: it stays 1O whatever the cost; the other one must
  // then go to 2O.
  const auto r = match_modes(set_of({obs(0.99, 0.001, 1), obs(0.76, 0.001)}), modes);
  REQUIRE(r.status == MatchStatus::ok);
  CHECK(r.assignments[0].order == 1);
  CHECK(r.assignments[1].order == 2);
  CHECK(r.assignments[0].residual_sigma > 100);
}

TEST_CASE("excluded modes are not matched and are listed with the reason") {
  std::vector<ModelPeriod> modes = {mode(0, 1.0), mode(1, 0.75), mode(2, 0.6)};
  modes[1].usable = false;
  modes[1].why_not = "not trusted: residual large";
  auto r = match_modes(set_of({obs(0.75, 0.001)}), modes);
  REQUIRE(r.status == MatchStatus::ok);
  CHECK(r.assignments[0].order != 1);
  REQUIRE(r.excluded.size() == 1);
  CHECK(contains(r.excluded[0], "1O: not trusted"));

  r = match_modes(set_of({obs(0.75, 0.001, 1)}), modes);
  CHECK(r.status == MatchStatus::no_assignment);
  CHECK(contains(r.message, "labelled 1O"));
  CHECK(contains(r.message, "excluded"));

  r = match_modes(set_of({obs(0.75, 0.001, 5)}), modes);
  CHECK(r.status == MatchStatus::no_assignment);
  CHECK(contains(r.message, "not solved"));

  r = match_modes(set_of({obs(0.9, 0.01), obs(0.8, 0.01), obs(0.7, 0.01)}), modes);
  CHECK(r.status == MatchStatus::no_assignment);
  CHECK(contains(r.message, "only 2 usable modes"));
}

TEST_CASE("ranking: best chi^2 first, round-off ties in input order, top N, failures last") {
  std::vector<MatchRow> rows(5);
  const double chi2[] = {3.0, 1.0, 1.0 + 1e-13, 0.5, 2.0};
  for (std::size_t i = 0; i < rows.size(); ++i) {
    rows[i].index = i;
    rows[i].match.chi2 = chi2[i];
  }
  rows[3].status = "bad_number";
  const auto ranked = rank_rows(rows, 2);
  REQUIRE(ranked.size() == 3);
  CHECK(ranked[0].index == 1);
  CHECK(ranked[1].index == 2);
  CHECK(ranked[2].index == 3);
  CHECK_FALSE(ranked[2].ok());
  CHECK(rank_rows(rows, 0).size() == 5);
}

// ---- homology fit (model-free part: analytic uniform-sphere periods) ------------------------

TEST_CASE("homology fit recovers a known radius scale from analytically scaled periods") {
  // Reference: uniform sphere periods (Sterne 1937) for R_ref; the star has the same structure
  // at 1.1 R_ref, so its periods are (1.1)^(3/2) times longer (P ∝ (R^3/GM)^(1/2)).
  const double R = constants::R_sun * 2.0;
  const double M = constants::M_sun * 1.5;
  const auto modes = sterne_modes(6, 0.3, 1e-6);
  const double s_true = std::pow(1.1, 1.5);
  std::mt19937 rng(7);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<Observation> items;
  const double sigma = 2e-4;
  for (int k : {0, 1, 2}) {
    items.push_back(obs(s_true * modes[static_cast<std::size_t>(k)].period_d + sigma * noise(rng), sigma));
  }
  const auto fit = fit_homology(set_of(items), modes, M, R);
  REQUIRE(fit.ok);
  CHECK(fit.match.assignments[0].order == 0);
  CHECK(fit.match.assignments[1].order == 1);
  CHECK(fit.match.assignments[2].order == 2);
  CHECK(std::abs(fit.radius_cm - 1.1 * R) < 3.0 * fit.radius_sigma_cm);
  CHECK(fit.radius_sigma_cm > 0);
  CHECK(fit.radius_sigma_cm < 1e-3 * R);
  // rho_mean scales as R^-3; its relative error is three halves of... 3 sigma_R/R.
  CHECK(fit.rho_mean == doctest::Approx(fit.rho_mean_ref * std::pow(R / fit.radius_cm, 3)));
  CHECK(fit.rho_mean_sigma / fit.rho_mean ==
        doctest::Approx(3.0 * fit.radius_sigma_cm / fit.radius_cm));
  // Curvature check: chi^2 rises by ~1 at s +- sigma_s with the assignment held.
  auto chi2_at = [&](double s) { return match_modes(set_of(items), scale_periods(modes, s)).chi2; };
  const double rise = chi2_at(fit.scale + fit.scale_sigma) - chi2_at(fit.scale);
  CHECK(rise == doctest::Approx(1.0).epsilon(0.02));
}

TEST_CASE("homology fit with a wrong-by-far starting radius and only overtones observed") {
  const auto modes = sterne_modes(8, 0.2, 1e-6);
  const double s_true = std::pow(0.5, 1.5); // star at half the radius
  std::vector<Observation> items = {obs(s_true * modes[1].period_d, 1e-5),
                                    obs(s_true * modes[2].period_d, 1e-5)};
  const auto fit = fit_homology(set_of(items), modes, constants::M_sun, constants::R_sun);
  REQUIRE(fit.ok);
  CHECK(fit.match.assignments[0].order == 1);
  CHECK(fit.match.assignments[1].order == 2);
  CHECK(fit.scale == doctest::Approx(s_true).epsilon(1e-9));
  CHECK(fit.radius_cm == doctest::Approx(0.5 * constants::R_sun).epsilon(1e-9));
}

TEST_CASE("homology fit of one observation says the order is not constrained") {
  const auto modes = sterne_modes(4, 0.2, 1e-6);
  const auto fit = fit_homology(set_of({obs(0.3, 1e-4)}), modes, constants::M_sun, constants::R_sun);
  REQUIRE(fit.ok);
  CHECK(fit.match.assignments[0].order == 0);
  CHECK(fit.match.chi2 == doctest::Approx(0.0).epsilon(1e-12));
  CHECK(contains(fit.message, "one observation"));
}

// ---- with generated models and the solver ------------------------------------------------

namespace {

std::vector<ModelPeriod> solved_periods(const StellarModel& model, int count) {
  SolveOptions opts;
  opts.count = count;
  return model_periods(solve_modes(model, opts));
}

GeneratorOptions gen_options(double mass_msun, double radius_rsun, std::size_t points) {
  GeneratorOptions g;
  g.mass_msun = mass_msun;
  g.radius_rsun = radius_rsun;
  g.points = points;
  return g;
}

double p1_over_p0(const std::vector<ModelPeriod>& p) {
  REQUIRE(p.size() >= 2);
  REQUIRE(p[0].usable);
  REQUIRE(p[1].usable);
  return p[1].period_d / p[0].period_d;
}

} // namespace

TEST_CASE("period ratios of generated models against facts of the trade") {
  // Uniform sphere, Gamma1 = 5/3: P1/P0 = sigma0/sigma1 = (1/(38/3))^(1/2) = 0.280976
  // (Sterne 1937, MNRAS 97, 582; closed form). Exact, so a tight tolerance.
  const double uniform = p1_over_p0(solved_periods(make_uniform(gen_options(1, 1, 2000)), 3));
  CHECK(uniform == doctest::Approx(std::sqrt(3.0 / 38.0)).epsilon(1e-4));

  // Centrally condensed models. Observed double-mode pulsators have P1/P0 = 0.70-0.72
  // (classical Cepheids, Alcock et al. 1995, LMC), 0.742-0.748 (RRd stars, Soszynski et al.
  // 2016) and about 0.77 (delta Scuti stars, from memory). A polytrope with constant Gamma1 is
  // not a Cepheid (no envelope ionization zones, no realistic Gamma1), so what we check is the
  // fact of the trade that central condensation, not detail, brings P1/P0 from the uniform
  // sphere's 0.28 up into the observed 0.70-0.78 band: allowed 0.68-0.80.
  const double n3 = p1_over_p0(solved_periods(make_polytrope(3.0, gen_options(1, 1, 2000)), 3));
  CHECK(n3 > 0.68);
  CHECK(n3 < 0.80);
  const double standard =
      p1_over_p0(solved_periods(make_standard_model(gen_options(5, 3, 2000)), 3));
  CHECK(standard > 0.68);
  CHECK(standard < 0.80);
  // More condensed than the uniform sphere by far (common practice: "the uniform sphere far
  // below").
  CHECK(n3 > 2.0 * uniform);
}

TEST_CASE("periods synthesized from a generated model are matched back to it in a grid") {
  // Grid: standard models of 2 Msun at four radii and an n = 3 polytrope at the star's radius
  // with Gamma1 = 5/3 (a different structure in Gamma1 only).
  std::vector<StellarModel> grid;
  for (double r : {2.0, 2.2, 2.4, 2.6}) grid.push_back(make_standard_model(gen_options(2, r, 800)));
  grid.push_back(make_polytrope(3.0, gen_options(2, 2.4, 800)));
  const std::size_t truth = 2;

  // Star: F, 1O, 2O of grid[truth] with 2e-4 relative uncertainty and noise drawn from it.
  const auto source = solved_periods(grid[truth], 5);
  std::mt19937 rng(2024);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<Observation> items;
  for (std::size_t k : {2u, 0u, 1u}) { // input order need not be period order
    const double sigma = 2e-4 * source[k].period_d;
    items.push_back(obs(source[k].period_d + sigma * noise(rng), sigma));
  }
  const auto star = set_of(items);

  std::size_t best = grid.size();
  double best_chi2 = 0;
  for (std::size_t i = 0; i < grid.size(); ++i) {
    const auto r = match_modes(star, solved_periods(grid[i], 5));
    REQUIRE(r.status == MatchStatus::ok);
    if (best == grid.size() || r.chi2 < best_chi2) {
      best = i;
      best_chi2 = r.chi2;
    }
  }
  CHECK(best == truth);
  const auto r = match_modes(star, solved_periods(grid[truth], 5));
  CHECK(r.assignments[0].order == 2);
  CHECK(r.assignments[1].order == 0);
  CHECK(r.assignments[2].order == 1);
  CHECK(r.chi2 < 20); // 3 observations: chi^2 beyond 20 has probability below 2e-4
}

TEST_CASE("homology: generated model at R, star at 1.1 R, the fit returns 1.1 R") {
  const auto base = make_polytrope(3.0, gen_options(1.5, 2.0, 800));
  const auto ref = solved_periods(base, 6);
  // Outside check of the scaling law itself: the same structure generated at 1.1 R has
  // periods (1.1)^(3/2) times longer (P ∝ (R^3/GM)^(1/2)), to the solver's accuracy.
  const auto big = solved_periods(make_polytrope(3.0, gen_options(1.5, 2.2, 800)), 6);
  const double s = std::pow(1.1, 1.5);
  for (std::size_t k = 0; k < 3; ++k)
    CHECK(big[k].period_d == doctest::Approx(s * ref[k].period_d).epsilon(1e-9));

  std::mt19937 rng(99);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<Observation> items;
  for (std::size_t k : {0u, 1u}) {
    const double sigma = 1e-4 * s * ref[k].period_d;
    items.push_back(obs(s * ref[k].period_d + sigma * noise(rng), sigma));
  }
  const auto fit = fit_homology(set_of(items), ref, base.mass(), base.radius());
  REQUIRE(fit.ok);
  CHECK(std::abs(fit.radius_cm - 1.1 * base.radius()) < 3.0 * fit.radius_sigma_cm);
  CHECK(fit.radius_sigma_cm < 1e-3 * base.radius());
  CHECK(fit.match.assignments[0].order == 0);
  CHECK(fit.match.assignments[1].order == 1);
}
