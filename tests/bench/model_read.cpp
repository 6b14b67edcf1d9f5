// Benchmark: parsing a 2,000-point model table (native format and through a column map).
// Built, not run by ctest:  build/tests/bench_model_read [repetitions [TABLE...]]
// Prints the median, mean and minimum wall time and the mean CPU time per parse (the machine is
// shared: the median and the minimum are the figures to compare). Batch runs parse thousands of
// models, so one parse of a 2,000-line table should stay well below a millisecond. Each TABLE file
// (e.g. a model of a track written by `radmode make`) is read into memory once and then timed with
// parse_model and with read_model (file read included).
#include "radmode/model_io.hpp"
#include "timing.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <fstream>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

namespace {

/// 2,000 rows of an invented model, 9 columns, numbers with `digits` significant digits.
std::string make_table(std::size_t n, bool solar_units, int digits) {
  std::string t = "# invented benchmark model\n# name = bench\n";
  t += solar_units ? "r[Rsun] m[Msun] P[log10] rho Gamma1 T L nabla_ad u\n"
                   : "r m P rho Gamma1 T L nabla_ad u\n";
  char buf[64];
  for (std::size_t i = 0; i < n; ++i) {
    const double x = double(i) / double(n - 1);
    const double P = 1e17 * (1.0 - 0.999 * x * x);
    const double row[9] = {solar_units ? 1.3 * x : 1.3 * x * 6.957e10,
                           solar_units ? 1.6 * x * x * x : 1.6 * x * x * x * 1.989e33,
                           solar_units ? std::log10(P) : P,
                           2.0 * (1.0 - 0.9 * x),
                           5.0 / 3.0,
                           1e7 * (1.0 - 0.99 * x),
                           3.8e33 * x,
                           0.4,
                           1e14 * (1.0 - 0.9 * x)};
    for (double v : row) {
      std::snprintf(buf, sizeof buf, "%.*g ", digits, v);
      t += buf;
    }
    t += '\n';
  }
  return t;
}

using radmode::bench::Measured;
using radmode::bench::time_calls;

void print_line(const char* label, const std::string& what, const Measured& t) {
  std::printf("%-27s(%s): median %7.1f us, mean %7.1f us, min %7.1f us, cpu %7.1f us per call\n",
              label, what.c_str(), 1e6 * t.wall.median_s, 1e6 * t.wall.mean_s,
              1e6 * t.wall.min_s, 1e6 * t.cpu_s);
}

void report(const char* label, const std::string& text, const radmode::ReadOptions& options,
            int reps) {
  const auto t =
      time_calls([&] { return radmode::parse_model(text, "bench", options).size(); }, reps);
  print_line(label, std::to_string(text.size()) + " bytes", t);
}

/// Times parse_model on the text of `path` and read_model on the file itself.
void report_file(const char* path, int reps) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    std::fprintf(stderr, "bench_model_read: cannot open %s\n", path);
    std::exit(2);
  }
  std::ostringstream text;
  text << in.rdbuf();
  report("file, parse_model", text.str(), {}, reps);
  print_line("file, read_model", path,
             time_calls([path] { return radmode::read_model(path).size(); }, reps));
}

} // namespace

int main(int argc, char** argv) {
  const int reps = argc > 1 ? std::atoi(argv[1]) : 500;
  if (reps <= 0) {
    std::fprintf(stderr, "usage: bench_model_read [repetitions > 0 [TABLE...]]\n");
    return 2;
  }
  const std::size_t n = 2000;
  const std::string short_numbers = make_table(n, false, 8);
  const std::string native = make_table(n, false, 17);
  const std::string solar = make_table(n, true, 17);
  radmode::ReadOptions map = radmode::parse_column_map(
      "r=1:Rsun,m=2:Msun,P=3:log10,rho=4,Gamma1=5,T=6,L=7,nabla_ad=8,u=9");
  map.skip_lines = 3;
  std::printf("table: %zu points x 9 columns; %d repetitions\n", n, reps);
  report("native, cgs, 8 digits", short_numbers, {}, reps);
  report("native, cgs, 17 digits", native, {}, reps);
  report("native, solar + log10", solar, {}, reps);
  report("column map by number, log", solar, map, reps);
  for (int i = 2; i < argc; ++i) report_file(argv[i], reps);
  return 0;
}
