// Benchmark of the stages between a model table and the eigen-solve (built, not run by ctest):
//   cmake --build build --target bench_bench_prepare
//   build/tests/bench_bench_prepare [POINTS=2000] [BATCHES=31] [STAGE]
// (with STAGE, only the stage of that name runs: for profiling one stage with perf)
// On an n = 3 polytrope of POINTS points (make_polytrope), the microseconds per call of each
// stage between the model table and the eigen-solve:
//   structure        Structure s(model)                       (validation included)
//   form             make_stellar_form(s, regular)
//   every_other_row  every_other_row(s)
//   row_subset       Structure::RowSubset(s, every other node): every_other_row's curves
//                    only, as the interpolation-error estimate builds them
//   form_from_half   make_stellar_form(s, regular, &half)     (interpolation-error estimate)
//   assemble_fine    assemble(form, all nodes)
//   assemble_coarse  assemble(form, every other node)
//   model_pencil     assemble_stellar_form(s, regular, false) (what solve_modes runs in
//                    place of form + assemble_fine)
//   all              all of them in a row: structure, form, every_other_row, form from
//                    it, three pencils (fine and coarse from the form, fine from the other)
//   solve_modes      solve_modes(model), 5 modes, default options
//   solve_modes_norich  the same with richardson = false (no coarse partner, no
//                    every_other_row, no interpolation-error estimate): the difference to
//                    solve_modes is mostly every_other_row + the interpolation-change pass
// Each stage runs BATCHES batches of calls (enough calls for ~2 ms per batch); the figures are
// the median and the minimum over the batches of thread CPU time per call, so other work on
// a shared machine disturbs them little. Results: docs/performance.md.
#include "radmode/discretize.hpp"
#include "radmode/eigensolve.hpp"
#include "radmode/generators.hpp"
#include "radmode/structure.hpp"

#include <algorithm>
#include <cstdio>
#include <ctime>
#include <string>
#include <vector>

using namespace radmode;

namespace {

double thread_cpu_us() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return 1e6 * static_cast<double>(ts.tv_sec) + 1e-3 * static_cast<double>(ts.tv_nsec);
}

double sink = 0; // keeps the results alive

struct Figures {
  double median_us, min_us;
};

template <class F> Figures per_call(int batches, F&& f) {
  // Calls per batch: about 2 ms worth, from one timed call.
  const double t0 = thread_cpu_us();
  f();
  const double once = std::max(thread_cpu_us() - t0, 1.0);
  const int calls = std::max(1, static_cast<int>(2000.0 / once));
  std::vector<double> us;
  for (int b = 0; b < batches; ++b) {
    const double c0 = thread_cpu_us();
    for (int k = 0; k < calls; ++k) f();
    us.push_back((thread_cpu_us() - c0) / calls);
  }
  std::sort(us.begin(), us.end());
  return {us[us.size() / 2], us.front()};
}

} // namespace

int main(int argc, char** argv) {
  GeneratorOptions g;
  g.points = argc > 1 ? static_cast<std::size_t>(std::stoul(argv[1])) : 2000;
  const int batches = argc > 2 ? std::max(1, std::stoi(argv[2])) : 31;
  const std::string only = argc > 3 ? argv[3] : "";
  const StellarModel model = make_polytrope(3.0, g);

  const Structure s(model);
  const auto half = every_other_row(s);
  if (!half) {
    std::fprintf(stderr, "bench_prepare: too few points for every_other_row\n");
    return 1;
  }
  const WeakForm form = make_stellar_form(s, SurfaceCondition::regular);
  const MeshSelection fine{all_nodes(form), false, false};
  const MeshSelection coarse{every_other_node(form, s.discontinuity()), false, false};

  std::printf("n = 3 polytrope, %zu points; thread CPU microseconds per call (%d batches)\n",
              g.points, batches);
  std::printf("%-18s %10s %10s\n", "stage", "median", "min");
  auto row = [&](const char* name, auto&& f) {
    if (!only.empty() && only != name) return;
    const Figures t = per_call(batches, f);
    std::printf("%-18s %10.1f %10.1f\n", name, t.median_us, t.min_us);
  };
  row("structure", [&] {
    const Structure t(model);
    sink += t.node_r()[1];
  });
  row("form", [&] { sink += make_stellar_form(s, SurfaceCondition::regular).a[1]; });
  row("every_other_row", [&] { sink += every_other_row(s)->node_r()[1]; });
  const std::vector<std::size_t> kept =
      every_other_node_keeping(s.interval_count(), s.discontinuity_nodes());
  row("row_subset", [&] { sink += static_cast<double>(Structure::RowSubset(s, kept).table_rows()); });
  row("form_from_half",
      [&] { sink += make_stellar_form(s, SurfaceCondition::regular, &*half).a[1]; });
  row("assemble_fine", [&] { sink += assemble(form, fine).k_diag[1]; });
  row("assemble_coarse", [&] { sink += assemble(form, coarse).k_diag[1]; });
  row("model_pencil",
      [&] { sink += assemble_stellar_form(s, SurfaceCondition::regular, false).pencil.k_diag[1]; });
  row("all", [&] {
    const Structure t(model);
    const WeakForm f = make_stellar_form(t, SurfaceCondition::regular);
    const auto h = every_other_row(t);
    const WeakForm fh = make_stellar_form(t, SurfaceCondition::regular, &*h);
    sink +=
        assemble(f, fine).k_diag[1] + assemble(f, coarse).k_diag[1] + assemble(fh, fine).k_diag[1];
  });
  SolveOptions so;
  so.count = 5;
  row("solve_modes", [&] { sink += solve_modes(model, so).modes[0].omega2; });
  SolveOptions sn = so;
  sn.richardson = false;
  row("solve_modes_norich", [&] { sink += solve_modes(model, sn).modes[0].omega2; });
  std::printf("(checksum %g)\n", sink);
  return 0;
}
