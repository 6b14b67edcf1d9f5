// radmode modes MODEL: radial modes of a model with their physical quantities, period
// ratios, the stability verdict and (optionally) a shooting check and eigenfunction profiles.
// User documentation: docs/modes.md.
//
// Exit status (besides the error kinds of error.hpp):
//   0   every requested mode was found (untrusted modes are flagged, not fatal);
//   12  (ErrorKind::numerical) a requested mode is missing, the solver did not converge, or
//       --verify found a mode on which shooting and finite elements disagree -- the report is
//       still written in full first;
//   20  (exit_unstable) with --fail-if-unstable, when the model is dynamically unstable.
#include "common.hpp"
#include "registry.hpp"

#include "radmode/constants.hpp"
#include "radmode/diagnostics.hpp"
#include "radmode/eigensolve.hpp"
#include "radmode/error.hpp"
#include "radmode/json.hpp"
#include "radmode/modes.hpp"
#include "radmode/output.hpp"
#include "radmode/shooting.hpp"
#include "radmode/stability.hpp"
#include "radmode/version.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <iomanip>
#include <iostream>
#include <memory>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

namespace radmode::cli {
namespace {

using constants::pi;

struct ModesCommandOptions {
  ModelInputOptions input;
  std::string model_path;
  int count = 5;
  std::string window;  ///< LO:HI followed by a unit, empty when not given
  std::string surface = "regular";
  std::string inner = "centre";
  bool no_extrapolate = false;
  bool verify = false;
  bool json = false;
  bool csv = false;
  std::string output;   ///< main report file ("" = standard output)
  std::string profiles; ///< eigenfunction file ("" = none)
  bool fail_if_unstable = false;
};

/// A --window value turned into an omega^2 range.
struct Window {
  double lo_omega2 = 0, hi_omega2 = 0; ///< [s^-2]
  std::string text;                   ///< as given
};

/// Parses "LO:HI<unit>" with unit uHz, mHz, cd (cycles per day), d, h or s. Frequencies map to
/// omega^2 = (2 pi nu)^2, periods to (2 pi / Pi)^2 (so the period range is reversed).
Window parse_window(const std::string& text) {
  const std::string expected =
      "--window: expected LO:HI followed by a unit, uHz, mHz or cd (cycles per day) for "
      "frequencies, d, h or s for periods (e.g. 20:200uHz or 0.1:2d); got '" + text + "'";
  const auto colon = text.find(':');
  if (colon == std::string::npos) throw UsageError(expected);
  const std::string lo_text = text.substr(0, colon);
  std::string rest = text.substr(colon + 1);
  std::size_t used = 0;
  double lo = 0, hi = 0;
  try {
    std::size_t lo_used = 0;
    lo = std::stod(lo_text, &lo_used);
    if (lo_used != lo_text.size()) throw UsageError(expected);
    hi = std::stod(rest, &used);
  } catch (const std::logic_error&) {
    throw UsageError(expected);
  }
  const std::string unit = rest.substr(used);
  if (!std::isfinite(lo) || !std::isfinite(hi)) throw UsageError(expected);

  double scale = 0; // to Hz for frequencies, to s for periods
  bool frequency = true;
  if (unit == "uHz") scale = 1e-6;
  else if (unit == "mHz") scale = 1e-3;
  else if (unit == "cd") scale = 1.0 / constants::day_s;
  else if (unit == "d") { scale = constants::day_s; frequency = false; }
  else if (unit == "h") { scale = constants::hour_s; frequency = false; }
  else if (unit == "s") { scale = 1.0; frequency = false; }
  else throw UsageError(expected);

  if (!(lo < hi))
    throw UsageError("--window: the lower end must be below the upper end; got '" + text + "'");
  if (frequency ? lo < 0 : lo <= 0)
    throw UsageError(std::string("--window: ") +
                     (frequency ? "frequencies must be >= 0" : "periods must be > 0") +
                     "; got '" + text + "'");
  Window w;
  w.text = text;
  if (frequency) {
    w.lo_omega2 = std::pow(2.0 * pi * lo * scale, 2);
    w.hi_omega2 = std::pow(2.0 * pi * hi * scale, 2);
  } else {
    w.lo_omega2 = std::pow(2.0 * pi / (hi * scale), 2);
    w.hi_omega2 = std::pow(2.0 * pi / (lo * scale), 2);
  }
  return w;
}

const char* surface_name(SurfaceCondition s) {
  return s == SurfaceCondition::regular ? "regular" : "fixed-pressure";
}
const char* inner_name(InnerCondition i) { return i == InnerCondition::centre ? "centre" : "rigid"; }
const char* status_name(SolveStatus s) {
  switch (s) {
  case SolveStatus::ok: return "ok";
  case SolveStatus::fewer_modes: return "fewer_modes";
  case SolveStatus::not_converged: return "not_converged";
  }
  return "unknown";
}

/// One number as text with `digits` significant digits ('g'), or `digits` after the point in
/// scientific ('e') or fixed ('f') notation; "-" for an absent or non-finite value.
std::string num(double x, int digits = 6, char style = 'g') {
  if (!std::isfinite(x)) return "-";
  std::ostringstream s;
  if (style == 'e') s << std::scientific;
  if (style == 'f') s << std::fixed;
  s << std::setprecision(digits) << x;
  return s.str();
}
std::string num(const std::optional<double>& x, int digits = 6, char style = 'g') {
  return x ? num(*x, digits, style) : std::string("-");
}

/// Pads or right-aligns a cell to `width` characters.
std::string cell(const std::string& s, std::size_t width, bool left = false) {
  if (s.size() >= width) return s;
  const std::string pad(width - s.size(), ' ');
  return left ? s + pad : pad + s;
}

struct RunResult {
  StellarModel model;
  SolveOptions solve;
  std::optional<Window> window;
  ModelDiagnostics diagnostics;
  ModeSet set;
  ModeReport report;
  StabilityVerdict verdict;
  bool verdict_from_extra_solve = false; ///< the fundamental was solved for separately
  std::vector<VerifyResult> verify;
  bool verify_failed = false;
};

// ---- text ------------------------------------------------------------------------------

std::string text_report(const ModesCommandOptions& o, const RunResult& run) {
  const ModelScales& sc = run.report.scales;
  std::ostringstream s;
  s << "radmode " << version << " -- radial adiabatic modes\n\n";
  s << "model        " << o.model_path << '\n';
  for (const auto& [key, value] : run.model.metadata) s << "  " << key << " = " << value << '\n';
  s << "mass         " << num(sc.mass_g / constants::M_sun, 6, 'g') << " M_sun  ("
    << num(sc.mass_g, 6, 'e') << " g)\n";
  s << "radius       " << num(sc.radius_cm / constants::R_sun, 6, 'g') << " R_sun  ("
    << num(sc.radius_cm, 6, 'e') << " cm)\n";
  s << "t_dyn        " << num(sc.t_dyn_s, 6, 'g') << " s = " << num(sc.t_dyn_s / 3600.0, 4, 'g')
    << " h   (G rho_mean)^(-1/2)\n";
  s << "points       " << run.model.size() << " in the table, " << run.set.node_r.size()
    << " finite-element nodes\n";
  s << "options      ";
  if (run.window)
    s << "window " << run.window->text;
  else
    s << "count " << run.solve.count;
  s << ", surface " << surface_name(run.solve.surface) << ", inner "
    << inner_name(run.solve.inner) << ", extrapolation " << (run.solve.richardson ? "on" : "off")
    << (o.verify ? ", shooting check on" : "") << "\n\n";

  if (run.set.status != SolveStatus::ok)
    s << "*** SOLVER: " << status_name(run.set.status) << ": " << run.set.message << " ***\n\n";

  const auto& modes = run.report.modes;
  if (modes.empty()) {
    s << "No modes found" << (run.window ? " in the window.\n" : ".\n");
  } else {
    // Column heads carry the units.
    const std::vector<std::pair<std::string, std::size_t>> heads = {
        {"mode", 5},        {"k", 3},          {"nodes", 5},        {"sigma^2", 12},
        {"omega^2[s^-2]", 13}, {"period[d]", 12}, {"period[h]", 11}, {"nu[uHz]", 11},
        {"nu[c/d]", 10},    {"Q[d]", 9},       {"omega*t_dyn", 11}, {"inertia", 10},
        {"rel.err", 9},     {"order", 9},      {"trusted", 7}};
    for (std::size_t i = 0; i < heads.size(); ++i)
      s << (i ? "  " : "") << cell(heads[i].first, heads[i].second, i == 0);
    s << '\n';
    for (const ModeQuantities& q : modes) {
      const std::vector<std::string> cells = {
          q.label,
          std::to_string(q.order),
          std::to_string(q.nodes),
          num(q.sigma2, 7, 'g'),
          num(q.omega2_s2, 5, 'e'),
          q.sign_uncertain ? std::string("marginal")
          : q.stable       ? num(q.period_d, 7, 'g')
                           : std::string("growing"),
          num(q.period_h, 6, 'g'),
          num(q.frequency_uHz, 6, 'g'),
          num(q.frequency_cd, 6, 'g'),
          num(q.Q_d, 5, 'f'),
          num(q.omega_t_dyn, 5, 'g'),
          num(q.inertia, 4, 'e'),
          num(q.error_estimate_rel, 1, 'e'),
          q.order_agrees ? "agree" : "DISAGREE",
          q.trusted ? "yes" : "NO"};
      for (std::size_t i = 0; i < heads.size(); ++i)
        s << (i ? "  " : "") << cell(cells[i], heads[i].second, i == 0);
      s << '\n';
    }
  }

  // Growing modes.
  bool any_growing = false;
  for (const ModeQuantities& q : modes) any_growing = any_growing || q.growth_rate_s;
  if (any_growing) {
    s << "\nGrowing modes (omega^2 <= 0: exp(eta t), no period)\n";
    s << cell("mode", 5, true) << "  " << cell("eta[s^-1]", 12) << "  "
      << cell("e-fold[s]", 12) << "  " << cell("e-fold[t_dyn]", 13) << '\n';
    for (const ModeQuantities& q : modes)
      if (q.growth_rate_s)
        s << cell(q.label, 5, true) << "  " << cell(num(q.growth_rate_s, 5, 'e'), 12) << "  "
          << cell(num(q.growth_time_s, 5, 'e'), 12) << "  "
          << cell(num(q.growth_time_t_dyn, 5, 'g'), 13) << '\n';
  }

  // Flags in plain words.
  std::ostringstream flags;
  for (const ModeQuantities& q : modes) {
    if (!q.trusted)
      flags << "  " << q.label << " (k = " << q.order << ") is NOT TRUSTED: "
            << (q.flag.empty() ? "the solver gave no reason" : q.flag) << '\n';
    if (!q.order_agrees)
      flags << "  " << q.label << ": the inertia count gives order " << q.order << " but xi has "
            << q.nodes << " nodes; its order is not established\n";
    if (q.sign_uncertain)
      flags << "  " << q.label << ": |omega^2| is within its error estimate; whether it "
                                   "oscillates or grows is not established (no period shown)\n";
  }
  if (!run.solve.richardson)
    flags << "  --no-extrapolate: the modes carry no discretization error estimate "
             "(rel.err is not shown)\n";
  if (!flags.str().empty()) s << "\nFlags\n" << flags.str();

  // Period ratios.
  s << "\nPeriod ratios P_k/P_0\n";
  if (run.report.period_ratios.empty())
    s << "  " << run.report.period_ratio_note << '\n';
  for (const PeriodRatio& p : run.report.period_ratios)
    s << "  " << cell(p.label + "/F", 6, true) << "  " << num(p.ratio, 6, 'f') << '\n';

  // Stability verdict (stability.hpp, the same block as radmode inspect).
  s << '\n';
  write_verdict_text(s, run.verdict);
  if (run.verdict_from_extra_solve)
    s << "  (the fundamental is outside the window: it was solved for separately for this "
         "verdict)\n";

  // Model warnings (diagnostics.hpp, the same as radmode inspect).
  s << "\nModel warnings\n";
  if (run.diagnostics.warnings.empty()) s << "  none\n";
  for (const DiagnosticWarning& w : run.diagnostics.warnings) s << "  " << w.message << '\n';

  // Shooting check.
  if (o.verify) {
    s << "\nShooting check (independent integration of the wave equation)\n";
    s << cell("mode", 5, true) << "  " << cell("omega^2 FE", 13) << "  "
      << cell("omega^2 shoot", 13) << "  " << cell("rel.diff", 9) << "  "
      << cell("nodes", 5) << "  result\n";
    for (const VerifyResult& v : run.verify) {
      s << cell(mode_label(v.order), 5, true) << "  " << cell(num(v.omega2_fe, 6, 'e'), 13)
        << "  " << cell(v.shoot.converged ? num(v.omega2_shoot, 6, 'e') : "-", 13) << "  "
        << cell(v.shoot.converged ? num(v.rel_diff, 1, 'e') : "-", 9) << "  "
        << cell(std::to_string(v.shoot.nodes), 5) << "  "
        << (v.agrees ? "agree" : "DISAGREE");
      if (!v.agrees && !v.shoot.message.empty()) s << " (" << v.shoot.message << ")";
      s << '\n';
    }
  }
  return s.str();
}

// ---- JSON ------------------------------------------------------------------------------

void write_options_json(JsonWriter& j, const ModesCommandOptions& o, const RunResult& run) {
  j.key("options").begin_object();
  if (run.window) {
    j.key("count").null();
    j.field("window", run.window->text);
    j.field("window_lo_omega2_s2", run.window->lo_omega2);
    j.field("window_hi_omega2_s2", run.window->hi_omega2);
  } else {
    j.field("count", run.solve.count);
    j.key("window").null();
  }
  j.field("surface", surface_name(run.solve.surface));
  j.field("inner", inner_name(run.solve.inner));
  j.field("extrapolate", run.solve.richardson);
  j.field("verify", o.verify);
  j.field("columns", o.input.columns);
  j.field("skip", static_cast<unsigned long>(o.input.skip));
  j.end_object();
}

std::string json_report(const ModesCommandOptions& o, const RunResult& run) {
  std::ostringstream out;
  JsonWriter j(out);
  const ModelScales& sc = run.report.scales;
  j.begin_object();
  j.field("version", version);
  j.key("model").begin_object();
  j.field("file", o.model_path);
  j.key("metadata").begin_object();
  for (const auto& [key, value] : run.model.metadata) j.field(key, value);
  j.end_object();
  j.field("mass_g", sc.mass_g);
  j.field("radius_cm", sc.radius_cm);
  j.field("t_dyn_s", sc.t_dyn_s);
  j.field("points", static_cast<unsigned long>(run.model.size()));
  j.field("fe_nodes", static_cast<unsigned long>(run.set.node_r.size()));
  j.end_object();
  write_options_json(j, o, run);
  j.key("solver").begin_object();
  j.field("status", status_name(run.set.status));
  j.field("message", run.set.message);
  j.field("iterations", run.set.iterations);
  j.end_object();
  j.key("modes").begin_array();
  for (const ModeQuantities& q : run.report.modes) write_mode_json(j, q);
  j.end_array();
  j.key("period_ratios").begin_array();
  for (const PeriodRatio& p : run.report.period_ratios) {
    j.begin_object();
    j.field("order", p.order);
    j.field("label", p.label);
    j.field("ratio", p.ratio);
    j.end_object();
  }
  j.end_array();
  j.field("period_ratio_note", run.report.period_ratio_note);
  write_verdict_json(j, run.verdict);
  j.field("verdict_from_extra_solve", run.verdict_from_extra_solve);
  write_warnings_json(j, run.diagnostics.warnings);
  if (o.verify) {
    j.key("verify").begin_array();
    for (const VerifyResult& v : run.verify) {
      j.begin_object();
      j.field("order", v.order);
      j.field("omega2_fe_s2", v.omega2_fe);
      j.key("omega2_shoot_s2");
      if (v.shoot.converged) j.value(v.omega2_shoot); else j.null();
      j.key("rel_diff");
      if (v.shoot.converged) j.value(v.rel_diff); else j.null();
      j.field("tolerance_s2", v.tolerance);
      j.field("nodes", v.shoot.nodes);
      j.field("nodes_agree", v.nodes_agree);
      j.field("converged", v.shoot.converged);
      j.field("agrees", v.agrees);
      j.field("message", v.shoot.message);
      j.end_object();
    }
    j.end_array();
  }
  j.end_object();
  out << '\n';
  return out.str();
}

std::string csv_report(const RunResult& run) {
  std::string s = mode_csv_header() + "\n";
  for (const ModeQuantities& q : run.report.modes) s += mode_csv_row(q) + "\n";
  return s;
}

// ---- run -------------------------------------------------------------------------------

int run_modes(const ModesCommandOptions& o, bool count_given) {
  if (o.count < 1)
    throw UsageError("--count: expected a number of modes >= 1; got " + std::to_string(o.count));
  if (o.json && o.csv) throw UsageError("--json and --csv: choose one output format");
  if (count_given && !o.window.empty())
    throw UsageError("--count and --window exclude each other: a window selects every mode in "
                     "it");

  RunResult run;
  run.solve.count = o.count;
  run.solve.surface =
      o.surface == "regular" ? SurfaceCondition::regular : SurfaceCondition::fixed_pressure;
  run.solve.inner = o.inner == "centre" ? InnerCondition::centre : InnerCondition::rigid;
  run.solve.richardson = !o.no_extrapolate;
  if (!o.window.empty()) {
    run.window = parse_window(o.window);
    run.solve.window_lo_omega2 = run.window->lo_omega2;
    run.solve.window_hi_omega2 = run.window->hi_omega2;
  }
  run.solve.validate();

  run.model = load_model(o.model_path, o.input);
  run.diagnostics = diagnose(run.model);
  run.set = solve_modes(run.model, run.solve);
  run.report = make_mode_report(run.model, run.set, run.solve);

  // The verdict needs the fundamental; a window may leave it out: solve for it alone then.
  const bool has_fundamental =
      std::any_of(run.report.modes.begin(), run.report.modes.end(),
                  [](const ModeQuantities& q) { return q.order == 0; });
  if (has_fundamental || run.set.status == SolveStatus::not_converged) {
    run.verdict = assess_stability(run.diagnostics, run.report);
  } else {
    SolveOptions fundamental = run.solve;
    fundamental.count = 1;
    fundamental.window_lo_omega2.reset();
    fundamental.window_hi_omega2.reset();
    const ModeSet f = solve_modes(run.model, fundamental);
    run.verdict = assess_stability(run.diagnostics, make_mode_report(run.model, f, fundamental));
    run.verdict_from_extra_solve = true;
  }

  if (o.verify) {
    ShootOptions shoot;
    shoot.surface = run.solve.surface;
    shoot.inner = run.solve.inner;
    run.verify = verify_modes(run.model, run.set, shoot);
    for (const VerifyResult& v : run.verify) run.verify_failed = run.verify_failed || !v.agrees;
  }

  const std::string main_text =
      o.json ? json_report(o, run) : o.csv ? csv_report(run) : text_report(o, run);
  // Profiles first: if either file cannot be written, nothing is left half done on stdout.
  if (!o.profiles.empty())
    write_text_file_atomic(o.profiles, format_profiles(run.report, o.model_path));
  write_text_file_atomic(o.output.empty() ? "-" : o.output, main_text);

  std::size_t untrusted = 0;
  for (const ModeQuantities& q : run.report.modes) untrusted += q.trusted ? 0 : 1;
  if (untrusted > 0)
    std::cerr << "radmode: warning: " << untrusted << " mode(s) not trusted; see the flags in "
              << "the report\n";

  if (run.set.status != SolveStatus::ok)
    throw Error(ErrorKind::numerical,
                std::string("modes: ") + status_name(run.set.status) + ": " + run.set.message);
  if (run.verify_failed)
    throw Error(ErrorKind::numerical,
                "modes: --verify: shooting disagrees with the finite-element result for at least "
                "one mode (see the shooting check in the report)");
  if (o.fail_if_unstable && run.verdict.unstable()) return exit_unstable;
  return 0;
}

const bool registered = register_command(
    {"modes", 30, [](CLI::App& app) -> std::pair<CLI::App*, RunFn> {
       auto opts = std::make_shared<ModesCommandOptions>();
       CLI::App* sub = app.add_subcommand(
           "modes", "Radial modes of a model: periods, frequencies, Q, growth rates, period "
                    "ratios, stability verdict; optionally eigenfunction profiles");
       sub->add_option("MODEL", opts->model_path, "Model table file")->required();
       sub->footer(stability_cautions);
       CLI::Option* count =
           sub->add_option("--count", opts->count, "Number of lowest modes (default 5)")
               ->type_name("K");
       sub->add_option("--window", opts->window,
                           "Every mode in a frequency or period range: LO:HI with a unit, "
                           "uHz, mHz, cd (cycles/day), d, h or s (e.g. 20:200uHz, 0.1:2d)")
               ->type_name("LO:HI<unit>");
       sub->add_option("--surface", opts->surface,
                       "Surface condition: regular (default; exact when P -> 0) or "
                       "fixed-pressure (delta P = 0)")
           ->check(CLI::IsMember({"regular", "fixed-pressure"}));
       sub->add_option("--inner", opts->inner,
                       "Inner condition: centre (default) or rigid (envelope, xi = 0 inside)")
           ->check(CLI::IsMember({"centre", "rigid"}));
       sub->add_flag("--no-extrapolate", opts->no_extrapolate,
                     "Skip the coarse-mesh solve: no Richardson extrapolation, no error estimate");
       sub->add_flag("--verify", opts->verify,
                     "Check every mode by shooting (independent integration); a disagreement "
                     "exits with status 12");
       sub->add_flag("--json", opts->json, "Write the report as JSON");
       sub->add_flag("--csv", opts->csv, "Write the per-mode table as CSV");
       sub->add_option("--output", opts->output,
                       "Write the report to FILE (atomically) instead of standard output")
           ->type_name("FILE");
       sub->add_option("--profiles", opts->profiles,
                       "Write the eigenfunctions of every mode to FILE (CSV, see docs/modes.md)")
           ->type_name("FILE");
       sub->add_flag("--fail-if-unstable", opts->fail_if_unstable,
                     "Exit with status 20 when the model is dynamically unstable");
       add_model_input_options(sub, opts->input);
       RunFn run = [opts, count]() { return run_modes(*opts, count->count() > 0); };
       return {sub, run};
     }});

} // namespace
} // namespace radmode::cli
