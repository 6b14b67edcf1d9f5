// radmode inspect MODEL: model diagnostics (time scales, equilibrium and mass checks, the
// Gamma1 < 4/3 criterion, the post-Newtonian threshold) and the dynamical-stability verdict
// from the exact fundamental mode. Text by default, --json on request (docs/inspect.md).
#include "common.hpp"
#include "registry.hpp"

#include "radmode/diagnostics.hpp"
#include "radmode/eigensolve.hpp"
#include "radmode/error.hpp"
#include "radmode/json.hpp"
#include "radmode/modes.hpp"
#include "radmode/output.hpp"
#include "radmode/stability.hpp"
#include "radmode/version.hpp"

#include <memory>
#include <sstream>

namespace radmode::cli {
namespace {

struct InspectOptions {
  std::string model;
  ModelInputOptions input;
  std::string output = "-";
  bool json = false;
  bool fail_if_unstable = false;
  DiagnosticsOptions diag;
  StabilityOptions stab;
  std::string pn_energy = "radiation";
};

std::string render_json(const InspectOptions& o, const StellarModel& model,
                        const ModelDiagnostics& d, const StabilityVerdict& v) {
  std::ostringstream out;
  JsonWriter j(out);
  j.begin_object();
  j.field("version", version);
  j.key("model").begin_object();
  j.field("file", o.model);
  j.key("metadata").begin_object();
  for (const auto& [k, val] : model.metadata) j.field(k, val);
  j.end_object();
  j.end_object();
  j.key("options").begin_object();
  j.field("hse_warn", o.diag.hse_warn);
  j.field("mass_warn", o.diag.mass_warn);
  j.field("hse_pressure_floor", o.diag.hse_pressure_floor);
  j.field("pn_internal_energy", pn_energy_name(o.diag.pn_energy));
  j.field("marginal_sigma2", o.stab.marginal_sigma2);
  j.field("weight_fraction", o.stab.weight_fraction);
  j.end_object();
  write_diagnostics_json(j, d);
  write_verdict_json(j, v);
  write_warnings_json(j, d.warnings);
  j.end_object();
  out << '\n';
  return out.str();
}

std::string render_text(const InspectOptions& o, const StellarModel& model,
                        const ModelDiagnostics& d, const StabilityVerdict& v) {
  std::ostringstream out;
  out << "radmode " << version << " inspect: " << o.model << "\n";
  for (const auto& [k, val] : model.metadata) out << "  # " << k << " = " << val << "\n";
  write_diagnostics_text(out, d);
  write_verdict_text(out, v);
  return out.str();
}

int run_inspect(InspectOptions o) {
  if (o.pn_energy == "radiation")
    o.diag.pn_energy = PnEnergy::radiation_limit;
  else if (o.pn_energy == "model")
    o.diag.pn_energy = PnEnergy::model;
  else
    throw UsageError("--pn-energy " + o.pn_energy + ": expected radiation or model");
  try {
    o.diag.validate();
    o.stab.validate();
  } catch (const UsageError& e) {
    throw UsageError(std::string("radmode inspect: ") + e.what());
  }

  const StellarModel model = load_model(o.model, o.input);
  const ModelDiagnostics d = diagnose(model, o.diag);
  SolveOptions solve;
  solve.count = 1;
  const ModeSet modes = solve_modes(model, solve);
  const ModeReport report = make_mode_report(model, modes, solve);
  StabilityVerdict v = assess_stability(d, report, o.stab);
  if (modes.status != SolveStatus::ok)
    v.notes.push_back("eigensolver: " + modes.message);

  write_text_file_atomic(o.output, o.json ? render_json(o, model, d, v)
                                          : render_text(o, model, d, v));
  if (o.fail_if_unstable) {
    if (v.unstable()) return exit_unstable;
    if (v.newtonian == Verdict::undetermined)
      throw Error(ErrorKind::numerical,
                  o.model + ": --fail-if-unstable: the fundamental mode was not found, so "
                            "stability cannot be established");
  }
  return 0;
}

const bool registered = register_command(
    {"inspect", 10, [](CLI::App& app) -> std::pair<CLI::App*, RunFn> {
       auto opts = std::make_shared<InspectOptions>();
       auto* sub = app.add_subcommand(
           "inspect", "Check a model and judge its dynamical stability: time scales, "
                      "hydrostatic and mass consistency, the Gamma1 < 4/3 criterion, the "
                      "post-Newtonian threshold and the verdict from the fundamental mode");
       sub->add_option("model", opts->model, "Model table")->required()->type_name("MODEL");
       add_model_input_options(sub, opts->input);
       sub->footer(stability_cautions);
       sub->add_flag("--json", opts->json, "Write JSON instead of text");
       sub->add_option("-o,--output", opts->output,
                       "Write the report here (temporary name, renamed when complete); "
                       "- = standard output")
           ->type_name("FILE");
       sub->add_flag("--fail-if-unstable", opts->fail_if_unstable,
                     "Exit with status 20 when the model is dynamically unstable (Newtonian or "
                     "post-Newtonian verdict), 12 when stability cannot be established");
       sub->add_option("--hse-warn", opts->diag.hse_warn,
                       "Warn when the hydrostatic residual exceeds this (default 1e-2)")
           ->type_name("X")
           ->check(CLI::PositiveNumber);
       sub->add_option("--mass-warn", opts->diag.mass_warn,
                       "Warn when m(R) and the integral of 4 pi r^2 rho dr differ by more than "
                       "this relative amount (default 1e-3)")
           ->type_name("X")
           ->check(CLI::PositiveNumber);
       sub->add_option("--pn-energy", opts->pn_energy,
                       "Internal energy in the post-Newtonian coefficient K: radiation "
                       "(u = 3P/rho, the structure coefficient; default) or model (the table's "
                       "u column, else P/((Gamma1-1) rho))")
           ->type_name("radiation|model")
           ->check(CLI::IsMember({"radiation", "model"}));
       sub->add_option("--marginal", opts->stab.marginal_sigma2,
                       "Call the fundamental marginal when |omega0^2| R^3/(GM) is below this "
                       "(or within its error estimate); default 1e-6")
           ->type_name("SIGMA2")
           ->check(CLI::Range(0.0, 0.999));
       return {sub, [opts] { return run_inspect(*opts); }};
     }});

} // namespace
} // namespace radmode::cli
