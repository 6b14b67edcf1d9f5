// Track runner, tables, shards/join and the along-track summary.
//
// The runner tests use a stand-in row function so that ordering, determinism and failure
// handling are tested on their own; the uniform-sphere values they carry come from the
// closed form sigma_k^2 = Gamma1 (k+1)(2k+3) - 4 (Sterne 1937, MNRAS 97, 582), so the
// summary's onset must land where Gamma1 = 4/3 (classical: omega0^2 = (3 Gamma1 - 4) GM/R^3).
#include "radmode/track.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "analytic_models.hpp"
#include "support.hpp"

#include <doctest/doctest.h>

#include <atomic>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <set>
#include <thread>

using namespace radmode;

namespace {

/// Row of a uniform sphere (M = 1 Msun, R = 10 Rsun) with Gamma1 from the file name
/// "g<gamma1>_<age_myr>", from the closed form above. "corrupt" throws a bad_number error.
TrackRow sphere_row(const std::string& path, int count) {
  if (path.find("corrupt") != std::string::npos)
    throw InputError(ErrorKind::bad_number, Location{path, 7, 2, "P"}, "expected a number");
  const auto us = path.find('_');
  const double g1 = std::stod(path.substr(1, us - 1));
  const std::string age = path.substr(us + 1);
  TrackRow row;
  row.metadata = {{"age_myr", age}, {"gamma1", path.substr(1, us - 1)}};
  if (std::stod(age) > 3) row.metadata.emplace_back("phase", "late, \"hot\"");
  const double M = constants::M_sun, R = 10 * constants::R_sun;
  const double tk = std::sqrt(R * R * R / (constants::G * M));
  row.mass_g = M;
  row.radius_cm = R;
  row.gamma1_pressure_weighted = g1;
  row.sigma2_0 = 3 * g1 - 4;
  for (int k = 0; k < count; ++k) {
    const double s2 = g1 * (k + 1) * (2 * k + 3) - 4;
    if (s2 > 0) row.period_d.push_back(2 * constants::pi * tk / std::sqrt(s2) / constants::day_s);
    else row.period_d.emplace_back();
  }
  row.stable = *row.sigma2_0 >= 0;
  row.verdict_pn = g1 > 1.34 ? "stable" : "unstable";
  return row;
}

std::vector<std::string> sphere_track() {
  // Gamma1 from 1.36 down to 1.30 in steps of 0.01, one Myr apart; a corrupt file in the middle.
  std::vector<std::string> paths;
  for (int i = 0; i <= 6; ++i) {
    char buf[32];
    std::snprintf(buf, sizeof buf, "g%.2f_%d", 1.36 - 0.01 * i, i);
    paths.push_back(buf);
    if (i == 2) paths.push_back("corrupt_x");
  }
  return paths;
}

TrackTable table_of(const TrackRun& run, int count, std::size_t total) {
  TrackTable t;
  t.settings = {{"program", "radmode test"}, {"count", std::to_string(count)},
                {"models", std::to_string(total)}};
  t.count = count;
  t.rows = run.rows;
  return t;
}

} // namespace

TEST_CASE("run_parallel runs every task exactly once for any thread count") {
  for (int jobs : {1, 2, 3, 8}) {
    std::vector<std::atomic<int>> hits(97);
    const auto n = run_parallel(hits.size(), jobs, [&](std::size_t i) { hits[i]++; });
    CHECK(n == hits.size());
    for (auto& h : hits) CHECK(h.load() == 1);
  }
  CHECK(run_parallel(0, 4, [](std::size_t) {}) == 0);
  CHECK_THROWS_AS(run_parallel(3, 0, [](std::size_t) {}), UsageError);
}

TEST_CASE("run_parallel rethrows a task's exception after joining") {
  CHECK_THROWS_AS(run_parallel(10, 2,
                               [](std::size_t i) {
                                 if (i == 4) throw std::runtime_error("boom");
                               }),
                  std::runtime_error);
}

TEST_CASE("run_parallel stops handing out work once stop is raised and reports progress") {
  std::atomic<bool> stop{false};
  std::atomic<int> started{0};
  std::size_t last_done = 0, calls = 0;
  const auto n = run_parallel(
      1000, 2,
      [&](std::size_t) {
        if (++started == 5) stop = true;
        std::this_thread::sleep_for(std::chrono::milliseconds(1));
      },
      [&](std::size_t done, std::size_t total) {
        CHECK(total == 1000);
        CHECK(done >= last_done);
        last_done = done;
        ++calls;
      },
      &stop, 0.001);
  CHECK(n >= 5);
  CHECK(n <= 6); // at most one task per thread was in flight when stop rose
  CHECK(calls >= 1);
  CHECK(last_done == n);
}

TEST_CASE("rows come back in input order, identical for 1 and 2 threads; failures get rows") {
  const auto paths = sphere_track();
  const int count = 3;
  const RowFunction fn = [&](const std::string& p) { return sphere_row(p, count); };
  const auto run1 = run_rows(paths, {}, fn, 1);
  const auto run2 = run_rows(paths, {}, fn, 2);
  REQUIRE(run1.rows.size() == paths.size());
  CHECK_FALSE(run1.cancelled);
  CHECK(run1.failed() == 1);
  for (std::size_t i = 0; i < paths.size(); ++i) {
    CHECK(run1.rows[i].index == i);
    CHECK(run1.rows[i].file == paths[i]);
  }
  const auto& bad = run1.rows[3];
  CHECK(bad.status == "bad_number");
  CHECK(bad.message.find("corrupt_x:7") != std::string::npos);
  const auto csv1 = format_track_csv(table_of(run1, count, paths.size()));
  const auto csv2 = format_track_csv(table_of(run2, count, paths.size()));
  CHECK(csv1 == csv2);
  CHECK(csv1.find("nan") == std::string::npos);
  CHECK(csv1.find("inf") == std::string::npos);
}

TEST_CASE("CSV layout: settings, column union in first-seen order, quoting, empty fields") {
  const int count = 2;
  const auto run = run_rows(sphere_track(), {},
                            [&](const std::string& p) { return sphere_row(p, count); }, 2);
  const auto csv = format_track_csv(table_of(run, count, run.rows.size()));
  const auto header_at = csv.find("index,");
  REQUIRE(header_at != std::string::npos);
  CHECK(csv.substr(0, header_at) ==
        "# program = radmode test\n# count = 2\n# models = 8\n");
  const auto header = csv.substr(header_at, csv.find('\n', header_at) - header_at);
  CHECK(header == "index,file,age_myr,gamma1,phase,status,message,mass_g,radius_cm,t_dyn_s,"
                  "gamma1_pressure_weighted,sigma2_0,period_d_0,period_d_1,P1_over_P0,Q_d_0,"
                  "stable,growth_time_s,verdict_pn");
  CHECK(csv.find("\"late, \"\"hot\"\"\"") != std::string::npos); // RFC 4180 quoting
}

TEST_CASE("CSV round trip is exact and join of shards equals the single run") {
  const auto paths = sphere_track();
  const int count = 3;
  const RowFunction fn = [&](const std::string& p) { return sphere_row(p, count); };
  const auto single = table_of(run_rows(paths, {}, fn, 2), count, paths.size());
  const auto single_csv = format_track_csv(single);
  CHECK(format_track_csv(parse_track_csv(single_csv, "single.csv")) == single_csv);

  for (int shards : {1, 2, 3, 5}) {
    std::vector<std::pair<std::string, TrackTable>> parts;
    std::set<std::size_t> covered;
    for (int s = 0; s < shards; ++s) {
      const auto idx = shard_indices(paths.size(), s, shards);
      std::vector<std::string> sub;
      for (auto i : idx) {
        CHECK(static_cast<int>(i % static_cast<std::size_t>(shards)) == s);
        CHECK(covered.insert(i).second);
        sub.push_back(paths[i]);
      }
      auto t = table_of(run_rows(sub, idx, fn, 1), count, paths.size());
      t.settings.emplace_back("shard", std::to_string(s) + "/" + std::to_string(shards));
      const std::string name = "shard" + std::to_string(s) + ".csv";
      parts.emplace_back(name, parse_track_csv(format_track_csv(t), name));
    }
    CHECK(covered.size() == paths.size());
    CHECK(format_track_csv(join_track_tables(parts)) == single_csv);
    if (shards > 1) {
      auto missing = parts;
      missing.erase(missing.begin() + 1);
      CHECK_THROWS_WITH_AS(join_track_tables(missing), doctest::Contains("missing"), InputError);
      auto twice = parts;
      twice.push_back(parts[1]);
      CHECK_THROWS_WITH_AS(join_track_tables(twice), doctest::Contains("twice"), InputError);
    }
  }
}

TEST_CASE("join rejects shards of different runs") {
  TrackTable a, b;
  a.settings = {{"count", "3"}, {"models", "0"}};
  b.settings = {{"count", "4"}, {"models", "0"}};
  CHECK_THROWS_WITH_AS(join_track_tables({{"a.csv", a}, {"b.csv", b}}),
                       doctest::Contains("b.csv"), InputError);
}

TEST_CASE("parse_track_csv names file and line of a bad table") {
  CHECK_THROWS_WITH_AS(parse_track_csv("a,b\n1,2\n", "x.csv"), doctest::Contains("x.csv"),
                       InputError);
  TrackTable t;
  t.count = 1;
  TrackRow r;
  r.period_d = {1.5};
  t.rows = {r};
  auto csv = format_track_csv(t);
  const auto at = csv.find("1.5");
  csv.replace(at, 3, "1.x");
  CHECK_THROWS_WITH_AS(parse_track_csv(csv, "y.csv"), doctest::Contains("y.csv:2: column"),
                       InputError);
  CHECK_THROWS_WITH_AS(parse_track_csv(csv.substr(0, csv.size() - 3), "z.csv"),
                       doctest::Contains("z.csv:2"), InputError);
}

TEST_CASE("shard options") {
  CHECK(parse_shard("0/3") == std::pair<int, int>(0, 3));
  CHECK(parse_shard("2/3") == std::pair<int, int>(2, 3));
  for (const char* bad : {"3/3", "1", "-1/2", "a/b", "1/0", "1/2/3", ""})
    CHECK_THROWS_WITH_AS(parse_shard(bad), doctest::Contains("--shard"), UsageError);
  CHECK(shard_indices(7, 1, 3) == std::vector<std::size_t>{1, 4});
  CHECK(shard_indices(2, 2, 3).empty());
}

TEST_CASE("model list: comments, blanks, paths relative to the list file") {
  test::TempDir dir;
  std::filesystem::create_directory(dir.file("sub"));
  test::write_text(dir.file("sub/list.txt"),
                   "# a track\n\n  a.txt  \n/abs/b.txt\n   # indented comment\nmore/c.txt\n");
  const auto paths = read_model_list(dir.file("sub/list.txt"));
  CHECK(paths == std::vector<std::string>{dir.file("sub/a.txt"), "/abs/b.txt",
                                          dir.file("sub/more/c.txt")});
  test::write_text(dir.file("empty.txt"), "# nothing\n");
  CHECK_THROWS_WITH_AS(read_model_list(dir.file("empty.txt")), doctest::Contains("empty.txt"),
                       InputError);
  CHECK_THROWS_AS(read_model_list(dir.file("none.txt")), Error);
}

TEST_CASE("summary finds the onset where Gamma1 = 4/3, by age, and period rates") {
  const auto paths = sphere_track();
  const int count = 2;
  const auto run =
      run_rows(paths, {}, [&](const std::string& p) { return sphere_row(p, count); }, 2);
  const auto s = summarize_track(run.rows, count);
  CHECK(s.models == 8);
  CHECK(s.failed == 1);
  CHECK(s.age_key == "age_myr");
  int sigma = 0, gamma = 0, verdict = 0;
  for (const auto& c : s.crossings) {
    if (c.quantity == "sigma2_0") {
      ++sigma;
      CHECK(c.direction == "stable_to_unstable");
      // Gamma1 = 1.36 - 0.01 t/Myr reaches 4/3 at t = (1.36 - 4/3)/0.01 Myr = 2.6667 Myr,
      // between the 1.34 model (t = 2, row 2) and the 1.33 model (t = 3, row 4 after the
      // corrupt row 3, which is skipped).
      CHECK(c.index_before == 2);
      CHECK(c.index_after == 4);
      REQUIRE(c.at_age_yr);
      CHECK(*c.at_age_yr == doctest::Approx((1.36 - 4.0 / 3.0) / 0.01 * 1e6).epsilon(1e-9));
      REQUIRE(c.at_index);
      CHECK(*c.at_index == doctest::Approx(2 + 2 * (2.0 / 3.0)).epsilon(1e-9));
    } else if (c.quantity == "gamma1_pressure_weighted") {
      ++gamma;
      CHECK(c.direction == "falls_below_4/3");
      CHECK(*c.at_age_yr == doctest::Approx(2.0 / 3.0 * 1e6 + 2e6).epsilon(1e-9));
    } else {
      ++verdict;
      CHECK(c.direction == "stable_to_unstable");
      CHECK(c.index_before == 1);
      CHECK(c.index_after == 2);
      CHECK_FALSE(c.at_index);
    }
  }
  CHECK(sigma == 1);
  CHECK(gamma == 1);
  CHECK(verdict == 1);
  // Period rates: Pi_k proportional to sigma_k^-1 at fixed M, R; differences over 1 Myr.
  bool found = false;
  for (const auto& r : s.rates)
    if (r.order == 1 && r.index_before == 0 && r.index_after == 1) {
      const double tk = std::sqrt(std::pow(10 * constants::R_sun, 3) / constants::GM_sun);
      const auto pi1 = [&](double g) { return 2 * constants::pi * tk / std::sqrt(g * 10 - 4); };
      CHECK(r.dperiod_dt_s_per_yr == doctest::Approx((pi1(1.35) - pi1(1.36)) / 1e6));
      CHECK(r.age_mid_yr == doctest::Approx(0.5e6));
      found = true;
    }
  CHECK(found);
  const auto text = format_track_summary(s);
  CHECK(text.find("age_myr = 2.66667") != std::string::npos);
  const auto json = format_track_json(table_of(run, count, paths.size()), s);
  CHECK(json.find("\"at_age_yr\": 2666666.66") != std::string::npos);
  CHECK(json.find("NaN") == std::string::npos);
  CHECK(json.find("\"period_d_0\": null") != std::string::npos);
}

TEST_CASE("summary without ages interpolates in model index and gives no rates") {
  std::vector<TrackRow> rows(3);
  const double s2[] = {1.0, 0.5, -1.5};
  for (std::size_t i = 0; i < 3; ++i) {
    rows[i].index = i;
    rows[i].sigma2_0 = s2[i];
    rows[i].period_d = {1.0 + static_cast<double>(i)};
  }
  rows[1].metadata = {{"age", "5"}}; // not in every row: no ages
  const auto s = summarize_track(rows, 1);
  CHECK(s.age_key.empty());
  REQUIRE(s.crossings.size() == 1);
  CHECK(*s.crossings[0].at_index == doctest::Approx(1.25));
  CHECK_FALSE(s.crossings[0].at_age_yr);
  CHECK(s.rates.empty());
}

TEST_CASE("options are validated with the option named") {
  TrackOptions o;
  o.count = 0;
  CHECK_THROWS_WITH_AS(o.validate(), doctest::Contains("--count"), UsageError);
  o.count = 5;
  o.jobs = -1;
  CHECK_THROWS_WITH_AS(o.validate(), doctest::Contains("--jobs"), UsageError);
  o.jobs = 0;
  CHECK(o.effective_jobs() >= 1);
}

TEST_CASE("evaluate_model on uniform spheres: sigma0^2 = 3 Gamma1 - 4, overtones, stability") {
  // Closed form sigma_k^2 = Gamma1 (k+1)(2k+3) - 4 (Sterne 1937). Tolerance 2e-3 relative
  // (plus 1e-3 absolute for the fundamental near zero): the solver's error on a 400-point
  // table is of order 1e-4 in sigma^2 (its own error estimate says so).
  TrackOptions opts;
  opts.count = 3;
  for (double g1 : {5.0 / 3.0, 1.40, 1.30}) {
    const auto model = test::uniform_sphere(test::uniform_mesh(399), g1);
    const TrackRow row = evaluate_model(model, opts);
    INFO("Gamma1 = " << g1 << ": " << row.message);
    CHECK(row.status == "ok");
    REQUIRE(row.sigma2_0);
    CHECK(*row.sigma2_0 == doctest::Approx(3 * g1 - 4).epsilon(2e-3).scale(0.5));
    CHECK(row.gamma1_pressure_weighted.value() == doctest::Approx(g1));
    CHECK(row.stable.value() == (g1 > 4.0 / 3.0));
    CHECK(row.verdict_pn == (g1 > 4.0 / 3.0 ? "stable" : "unstable"));
    REQUIRE(row.period_d.size() == 3);
    const double tk = std::sqrt(std::pow(6.957e10, 3) / (constants::G * 1.989e33));
    for (int k = 0; k < 3; ++k) {
      const double s2 = g1 * (k + 1) * (2 * k + 3) - 4;
      if (s2 <= 0) {
        CHECK_FALSE(row.period_d[static_cast<std::size_t>(k)]);
        continue;
      }
      REQUIRE(row.period_d[static_cast<std::size_t>(k)]);
      CHECK(*row.period_d[static_cast<std::size_t>(k)] ==
            doctest::Approx(2 * constants::pi * tk / std::sqrt(s2) / constants::day_s).epsilon(2e-3));
    }
    if (g1 < 4.0 / 3.0) {
      REQUIRE(row.growth_time_s);
      CHECK(*row.growth_time_s == doctest::Approx(tk / std::sqrt(4 - 3 * g1)).epsilon(2e-2));
      CHECK_FALSE(row.q_d_0);
      CHECK_FALSE(row.p1_over_p0);
    } else {
      // Q = 0.115836 d / sigma0 (physics.md section 2); P1/P0 = sigma0/sigma1.
      CHECK(row.q_d_0.value() == doctest::Approx(0.115836 / std::sqrt(3 * g1 - 4)).epsilon(2e-3));
      CHECK(row.p1_over_p0.value() ==
            doctest::Approx(std::sqrt((3 * g1 - 4) / (10 * g1 - 4))).epsilon(2e-3));
    }
  }
}

TEST_CASE("run_track: a track of uniform spheres finds the onset where Gamma1 = 4/3") {
  // Gamma1 = 1.40 - 0.02 i, age_yr = 1e5 i: sigma0^2 = 3 Gamma1 - 4 vanishes at
  // i = (1.40 - 4/3)/0.02 = 3.3333, age 3.3333e5 yr.
  std::vector<std::string> paths;
  for (int i = 0; i < 8; ++i) paths.push_back(std::to_string(i));
  const ModelLoader load = [](const std::string& p) {
    const int i = std::stoi(p);
    auto m = test::uniform_sphere(test::uniform_mesh(399), 1.40 - 0.02 * i);
    m.metadata = {{"age_yr", std::to_string(i * 100000)}};
    return m;
  };
  TrackOptions opts;
  opts.count = 2;
  opts.jobs = 2;
  const auto run = run_track(paths, {}, load, opts);
  REQUIRE(run.rows.size() == 8);
  CHECK(run.failed() == 0);
  const auto s = summarize_track(run.rows, opts.count);
  CHECK(s.age_key == "age_yr");
  bool found = false;
  for (const auto& c : s.crossings)
    if (c.quantity == "sigma2_0") {
      found = true;
      CHECK(c.index_before == 3);
      CHECK(c.index_after == 4);
      // sigma0^2 error ~1e-4 against a slope of 0.06 per step: 0.01 step tolerance.
      CHECK(*c.at_index == doctest::Approx(10.0 / 3.0).epsilon(0.003));
      CHECK(*c.at_age_yr == doctest::Approx(1e5 * 10.0 / 3.0).epsilon(0.003));
    }
  CHECK(found);
  opts.jobs = 1;
  CHECK(format_track_csv(table_of(run_track(paths, {}, load, opts), 2, 8)) ==
        format_track_csv(table_of(run, 2, 8)));
}
