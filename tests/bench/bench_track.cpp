// Benchmark of `radmode track`'s core: models per second for a track of model files.
//
//   bench_track [MODELS=1000] [POINTS=2000] [COUNT=5]
//
// Writes MODELS n = 3 polytropes of POINTS points (Gamma1 stepping from 1.70 down to 1.40,
// radius from 1 to 10 Rsun, so no two files are alike) into a temporary directory, then runs
// run_track (read + diagnose + solve COUNT modes + row) on them with 1 thread and with all
// hardware threads, twice each, and prints models/s. File generation is not timed; reading
// the files is (a track run reads them). Wall-clock and process CPU time are both printed.
// Results: docs/performance-track.md.
#include "radmode/generators.hpp"
#include "radmode/model_io.hpp"
#include "radmode/track.hpp"

#include <sys/resource.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <random>
#include <string>
#include <thread>

namespace fs = std::filesystem;

/// CPU time of the whole process (all threads) [s]: on a machine shared with other jobs
/// the wall-clock rate understates what the code does, the CPU-time rate does not.
static double cpu_seconds() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
         1e-6 * static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
}

int main(int argc, char** argv) {
  const std::size_t models = argc > 1 ? std::strtoul(argv[1], nullptr, 10) : 1000;
  const std::size_t points = argc > 2 ? std::strtoul(argv[2], nullptr, 10) : 2000;
  const int count = argc > 3 ? std::atoi(argv[3]) : 5;
  if (models < 2 || points < 10 || count < 1) {
    std::fprintf(stderr, "usage: bench_track [MODELS>=2] [POINTS>=10] [COUNT>=1]\n");
    return 2;
  }
  std::random_device rd;
  const fs::path dir = fs::temp_directory_path() / ("radmode-bench-track-" + std::to_string(rd()));
  fs::create_directories(dir);

  std::vector<std::string> paths;
  for (std::size_t i = 0; i < models; ++i) {
    const double f = static_cast<double>(i) / static_cast<double>(models - 1);
    radmode::GeneratorOptions g;
    g.points = points;
    g.gamma1 = 1.70 - 0.30 * f;
    g.radius_rsun = 1.0 + 9.0 * f;
    auto m = radmode::make_polytrope(3.0, g);
    m.metadata.emplace_back("age_myr", std::to_string(i));
    const auto path = (dir / ("model" + std::to_string(i) + ".txt")).string();
    radmode::write_model(m, path);
    paths.push_back(path);
  }

  radmode::keep_freed_memory(); // as `radmode track` does
  const radmode::ModelLoader load = [](const std::string& p) { return radmode::read_model(p); };
  const int all = static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  std::printf("bench_track: %zu models, %zu points, %d modes each\n", models, points, count);
  for (int jobs : {1, all}) {
    for (int rep = 0; rep < 2; ++rep) {
      radmode::TrackOptions opts;
      opts.count = count;
      opts.jobs = jobs;
      const double c0 = cpu_seconds();
      const auto t0 = std::chrono::steady_clock::now();
      const auto run = radmode::run_track(paths, {}, load, opts);
      const double s =
          std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
      const double c = cpu_seconds() - c0;
      std::printf("  jobs %d, run %d: wall %.3f s = %.0f models/s; CPU %.3f s = %.0f models per "
                  "CPU-second; %zu failed\n",
                  jobs, rep + 1, s, static_cast<double>(models) / s, c,
                  static_cast<double>(models) / c, run.failed());
      for (const auto& row : run.rows)
        if (rep == 0 && !row.ok()) {
          std::printf("    first failure: %s: %s: %s\n", row.file.c_str(), row.status.c_str(),
                      row.message.c_str());
          break;
        }
    }
    if (all == 1) break;
  }
  std::error_code ec;
  fs::remove_all(dir, ec);
  return 0;
}
