// The per-model physics of a track row: diagnostics, modes, derived quantities.
#include "radmode/track.hpp"

#include "radmode/constants.hpp"
#include "radmode/diagnostics.hpp"
#include "radmode/error.hpp"
#include "radmode/modes.hpp"

#include <cmath>
#include <cstdio>

namespace radmode {

namespace {

const char* solve_status_name(SolveStatus s) {
  switch (s) {
  case SolveStatus::ok: return "ok";
  case SolveStatus::fewer_modes: return "fewer_modes";
  case SolveStatus::not_converged: return "not_converged";
  }
  return "numerical";
}

void append(std::string& message, const std::string& more) {
  if (more.empty()) return;
  if (!message.empty()) message += "; ";
  message += more;
}

} // namespace

TrackRow evaluate_model(const StellarModel& model, const TrackOptions& options) {
  options.validate();
  TrackRow row;
  row.metadata = model.metadata;
  row.file = model.source;

  DiagnosticsOptions diag_options;
  diag_options.stability_only = true; // a row reads only the masses, t_dyn and the verdicts
  const ModelDiagnostics d = diagnose(model, diag_options);
  row.mass_g = d.mass_g;
  row.radius_cm = d.radius_cm;
  row.t_dyn_s = d.t_dyn_s;
  row.gamma1_pressure_weighted = d.gamma1_pressure_weighted;
  row.verdict_pn = d.pn_unstable ? "unstable" : "stable";

  SolveOptions so = options.solve;
  so.count = options.count;
  so.eigenfunctions = false; // a row needs no xi
  const ModeSet set = solve_modes(model, so);
  const double gm_r3 = d.mass_g / (d.radius_cm * d.radius_cm * d.radius_cm) * constants::G;

  const auto count = static_cast<std::size_t>(options.count);
  row.period_d.assign(count, std::nullopt);
  std::optional<double> period0_s, period1_s;
  std::vector<char> seen(count, 0);
  std::string problems;
  for (const auto& mode : set.modes) {
    if (!mode.trusted || !mode.order_agrees) {
      char buf[160];
      std::snprintf(buf, sizeof buf, "mode of order %d (%d nodes) with sigma^2 = %.6g not trusted",
                    mode.order, mode.nodes, mode.omega2 / gm_r3);
      append(problems, buf + (" (" + (mode.flag.empty() ? std::string("order not established")
                                                         : mode.flag) + ")"));
      continue;
    }
    if (mode.order < 0 || static_cast<std::size_t>(mode.order) >= count) continue;
    const auto k = static_cast<std::size_t>(mode.order);
    seen[k] = 1;
    // The sign of omega^2 is only established when |omega^2| exceeds its error estimate.
    const bool sign_known = std::abs(mode.omega2) > mode.error_estimate;
    if (k == 0) {
      row.sigma2_0 = mode.omega2 / gm_r3;
      if (sign_known) {
        row.stable = mode.omega2 > 0;
        if (mode.omega2 < 0) row.growth_time_s = 1.0 / std::sqrt(-mode.omega2);
      } else {
        append(problems, "fundamental marginal: |omega^2| within its error estimate, "
                         "stability not established");
      }
    }
    if (mode.omega2 > 0 && sign_known) {
      const double period_s = 2 * constants::pi / std::sqrt(mode.omega2);
      row.period_d[k] = period_s / constants::day_s;
      if (k == 0) period0_s = period_s;
      if (k == 1) period1_s = period_s;
    }
  }
  for (std::size_t k = 0; k < count; ++k)
    if (!seen[k] && set.status == SolveStatus::ok)
      append(problems, "order " + std::to_string(k) + " not among the trusted modes");
  if (period0_s) row.q_d_0 = pulsation_constant_d(*period0_s, d.mass_g, d.radius_cm);
  if (period0_s && period1_s) row.p1_over_p0 = *period1_s / *period0_s;

  if (set.status != SolveStatus::ok) {
    row.status = solve_status_name(set.status);
    row.message = set.message;
    append(row.message, problems);
  } else if (!problems.empty()) {
    row.status = "untrusted";
    row.message = problems;
  }
  return row;
}

TrackRun run_track(const std::vector<std::string>& paths, const std::vector<std::size_t>& indices,
                   const ModelLoader& load, const TrackOptions& options,
                   const TrackProgress& progress, const std::atomic<bool>* stop) {
  options.validate();
  return run_rows(
      paths, indices,
      [&](const std::string& path) { return evaluate_model(load(path), options); },
      options.effective_jobs(), progress, stop);
}

} // namespace radmode
