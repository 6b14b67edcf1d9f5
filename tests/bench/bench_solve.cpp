// Benchmark of the finite-element eigen-solve (built, not run by ctest):
//   build/tests/bench_solve [repeats]
// For n = 3 polytropes of 2,000 / 20,000 / 200,000 points (make_polytrope):
//  - "assemble+solve": Structure + energy form + tridiagonal pencil + solve_pencil of the 10
//    lowest modes on the model mesh (nested iteration: Spectra shift-invert Lanczos on the
//    coarsest of a family of every-other-node meshes, Rayleigh quotient iteration up to the
//    model mesh, every eigenvalue's index verified by inertia);
//  - "solve 10": the solve_pencil call alone, on the pencil assembled once;
//  - two references with exactly O(N) work: 20 inertia counts on that pencil (bound by the
//    latency of its divisions, like the solver's recurrences) and 20 STREAM triads over arrays
//    as large as the solver's work arrays (bound by memory traffic): between them, how far
//    the memory hierarchy bends O(N) work on this machine as the arrays leave the caches;
//  - "solve_modes": the whole default solve_modes (5 modes, nested iteration, Richardson with
//    the coarse mesh, interpolation-error estimate) and with 10 modes;
// median wall-clock milliseconds and median thread CPU milliseconds of the repeats, and the
// scaling exponent fitted to log(time) against log(N). Then a throughput run: two threads each
// solving 2,000-point models (default options) for about two seconds: models per second.
#include "radmode/discretize.hpp"
#include "radmode/eigensolve.hpp"
#include "radmode/generators.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <string>
#include <thread>
#include <vector>

using namespace radmode;

namespace {

double thread_cpu_seconds() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

double wall_seconds() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v[v.size() / 2];
}

struct Timing {
  double wall_ms, cpu_ms;
};

template <class F> Timing time_it(int repeats, F&& f) {
  std::vector<double> wall, cpu;
  for (int i = 0; i < repeats; ++i) {
    const double w0 = wall_seconds(), c0 = thread_cpu_seconds();
    f();
    cpu.push_back(1e3 * (thread_cpu_seconds() - c0));
    wall.push_back(1e3 * (wall_seconds() - w0));
  }
  return {median(wall), median(cpu)};
}

/// Least-squares slope of log(t) against log(n).
double exponent(const std::vector<double>& n, const std::vector<double>& t) {
  double sx = 0, sy = 0, sxx = 0, sxy = 0;
  const double k = static_cast<double>(n.size());
  for (std::size_t i = 0; i < n.size(); ++i) {
    const double x = std::log(n[i]), y = std::log(t[i]);
    sx += x;
    sy += y;
    sxx += x * x;
    sxy += x * y;
  }
  return (k * sxy - sx * sy) / (k * sxx - sx * sx);
}

} // namespace

int main(int argc, char** argv) {
  const int repeats = argc > 1 ? std::max(1, std::stoi(argv[1])) : 21;
  const std::vector<std::size_t> sizes = {2000, 20000, 200000};
  std::vector<double> ns, t_solve, t_only, t_modes, t_ref, t_stream;
  std::printf("%9s %22s %22s %22s %22s\n", "points", "assemble+solve 10", "solve 10", "solve_modes 5",
              "solve_modes 10");
  std::printf("%9s %22s %22s %22s %22s\n", "", "wall ms / cpu ms", "wall ms / cpu ms", "wall ms / cpu ms",
              "wall ms / cpu ms");
  for (const std::size_t n : sizes) {
    GeneratorOptions g;
    g.points = n;
    const StellarModel model = make_polytrope(3.0, g);
    const int reps = n >= 200000 ? std::max(3, repeats / 4) : repeats;
    double sink = 0;
    const Timing a = time_it(reps, [&] {
      const Structure s(model);
      const WeakForm f = make_stellar_form(s, SurfaceCondition::regular);
      const TridiagonalPencil p = assemble(f, {all_nodes(f), false, false});
      PencilRequest req;
      req.count = 10;
      sink += solve_pencil(p, req).pairs.back().lambda;
    });
    const Structure s0(model);
    const WeakForm f0 = make_stellar_form(s0, SurfaceCondition::regular);
    const TridiagonalPencil p0 = assemble(f0, {all_nodes(f0), false, false});
    PencilRequest req10;
    req10.count = 10;
    const Timing o = time_it(reps, [&] { sink += solve_pencil(p0, req10).pairs.back().lambda; });
    // A reference with exactly O(N) work and no allocation: 20 inertia counts (one division
    // per row each). Its exponent shows what the memory hierarchy alone does to O(N) work.
    const Timing r = time_it(reps, [&] {
      for (int k = 0; k < 20; ++k) sink += inertia_below(p0, 1.0 + k);
    });
    t_ref.push_back(r.cpu_ms);
    // A second reference, O(N) and bound by memory traffic instead: 20 passes of the STREAM
    // triad a = b + q c (McCalpin's memory-bandwidth benchmark) over three arrays of 5 N
    // doubles, the size of the work arrays of one block of five vectors in the solver.
    std::vector<double> ta(5 * n, 0.0), tb(5 * n, 1.0), tc(5 * n, 2.0);
    const Timing st = time_it(reps, [&] {
      for (int k = 0; k < 20; ++k) {
        const double q = 1.0 + 1e-3 * k;
        for (std::size_t i = 0; i < ta.size(); ++i) ta[i] = tb[i] + q * tc[i];
        sink += ta[n];
      }
    });
    t_stream.push_back(st.cpu_ms);
    SolveOptions o5, o10;
    o10.count = 10;
    const Timing b = time_it(reps, [&] { sink += solve_modes(model, o5).modes.back().omega2; });
    const Timing c = time_it(reps, [&] { sink += solve_modes(model, o10).modes.back().omega2; });
    std::printf("%9zu %10.3f / %9.3f %10.3f / %9.3f %10.3f / %9.3f %10.3f / %9.3f   (%g)\n", n,
                a.wall_ms, a.cpu_ms, o.wall_ms, o.cpu_ms, b.wall_ms, b.cpu_ms, c.wall_ms, c.cpu_ms,
                sink > 0 ? 1.0 : 0.0);
    ns.push_back(static_cast<double>(n));
    t_solve.push_back(a.cpu_ms);
    t_only.push_back(o.cpu_ms);
    t_modes.push_back(b.cpu_ms);
  }
  std::printf("fitted scaling exponent (cpu time ~ N^p): assemble+solve 10: p = %.2f, "
              "solve 10: p = %.2f, solve_modes 5: p = %.2f\n",
              exponent(ns, t_solve), exponent(ns, t_only), exponent(ns, t_modes));
  std::printf("reference O(N) work (20 inertia counts): %.3f / %.3f / %.3f ms, p = %.2f\n",
              t_ref[0], t_ref[1], t_ref[2], exponent(ns, t_ref));
  std::printf("reference O(N) memory traffic (20 triads on 3 x 5N doubles): %.3f / %.3f / %.3f ms, "
              "p = %.2f\n",
              t_stream[0], t_stream[1], t_stream[2], exponent(ns, t_stream));
  // Exponents between neighbouring sizes: where the time per point starts to grow.
  auto pair = [](const std::vector<double>& t, std::size_t i) {
    return std::log(t[i + 1] / t[i]) / std::log(10.0);
  };
  std::printf("exponent 2,000 -> 20,000 / 20,000 -> 200,000 points: solve 10: %.2f / %.2f, "
              "solve_modes 5: %.2f / %.2f, inertia reference: %.2f / %.2f, triad reference: "
              "%.2f / %.2f\n",
              pair(t_only, 0), pair(t_only, 1), pair(t_modes, 0), pair(t_modes, 1), pair(t_ref, 0),
              pair(t_ref, 1), pair(t_stream, 0), pair(t_stream, 1));

  // Throughput: two threads, default options, 2,000-point models.
  GeneratorOptions g;
  g.points = 2000;
  const StellarModel model = make_polytrope(3.0, g);
  std::atomic<long> done{0};
  std::atomic<bool> stop{false};
  const double w0 = wall_seconds();
  std::vector<std::thread> pool;
  for (int t = 0; t < 2; ++t)
    pool.emplace_back([&] {
      while (!stop.load()) {
        const ModeSet set = solve_modes(model);
        if (!set.modes.empty()) ++done;
      }
    });
  std::this_thread::sleep_for(std::chrono::seconds(2));
  stop = true;
  for (auto& th : pool) th.join();
  const double elapsed = wall_seconds() - w0;
  std::printf("throughput, 2 threads, 2,000 points, 5 modes + Richardson: %.0f models/s "
              "(%ld models in %.2f s)\n",
              static_cast<double>(done.load()) / elapsed, done.load(), elapsed);
  return 0;
}
