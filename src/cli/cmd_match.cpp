// radmode match: observed periodicities against one model or a grid of models. Every model is
// solved, its modes are identified with the observations (minimum chi^2, order preserved,
// labels respected) and the models are ranked by chi^2; --fit-radius also fits each model's
// radius at fixed mass and structure. Threads: --jobs N (track.hpp's runner). A model that
// cannot be read or matched gets a failure row; the run goes on (exit status 21 at the end).
#include "common.hpp"
#include "registry.hpp"

#include "radmode/error.hpp"
#include "radmode/match.hpp"
#include "radmode/output.hpp"
#include "radmode/track.hpp"

#include <filesystem>
#include <iostream>
#include <memory>
#include <thread>

namespace radmode::cli {
namespace {

struct MatchCliOptions {
  std::vector<std::string> models;
  std::string list;
  std::string observed;
  std::vector<std::string> periods;
  int count = 0;
  int jobs = 0;
  int top = 0;
  bool fit_radius = false;
  bool json = false;
  std::string output = "-";
  std::string surface = "regular";
  std::string inner = "centre";
  ModelInputOptions input;
};

ObservationSet observations(const MatchCliOptions& o) {
  ObservationSet set;
  if (!o.observed.empty()) set = read_observations(o.observed);
  if (!o.periods.empty()) {
    set.source = set.source.empty() ? "command line" : set.source + " + command line";
    for (std::size_t i = 0; i < o.periods.size(); ++i)
      set.items.push_back(
          parse_observation_spec(o.periods[i], "--period #" + std::to_string(i + 1)));
    validate_observations(set);
  }
  if (set.items.empty()) throw UsageError("match: expected --observed FILE or --period SPEC");
  return set;
}

std::vector<std::string> input_paths(const MatchCliOptions& o) {
  std::vector<std::string> paths = o.models;
  if (!o.list.empty()) {
    const auto listed = read_model_list(o.list);
    paths.insert(paths.end(), listed.begin(), listed.end());
  }
  if (paths.empty()) throw UsageError("match: expected model files or --list FILE");
  return paths;
}

int run_match(const MatchCliOptions& o) {
  if (o.jobs < 0) throw UsageError("--jobs " + std::to_string(o.jobs) + ": expected 0 (all cores) or more");
  MatchReport report;
  report.observations = observations(o);
  MatchOptions& opts = report.options;
  opts.count = o.count > 0 ? o.count : auto_mode_count(report.observations);
  opts.top = o.top;
  opts.fit_radius = o.fit_radius;
  opts.solve.surface =
      o.surface == "regular" ? SurfaceCondition::regular : SurfaceCondition::fixed_pressure;
  opts.solve.inner = o.inner == "centre" ? InnerCondition::centre : InnerCondition::rigid;
  opts.validate();
  const std::vector<std::string> paths = input_paths(o);
  if (o.output != "-") {
    const auto dir = std::filesystem::path(o.output).parent_path();
    std::error_code ec;
    if (!dir.empty() && !std::filesystem::is_directory(dir, ec))
      throw Error(ErrorKind::io, o.output + ": the directory " + dir.string() + " does not exist");
  }

  std::vector<MatchRow> rows(paths.size());
  const int jobs = o.jobs > 0 ? o.jobs
                              : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  run_parallel(paths.size(), jobs, [&](std::size_t k) {
    MatchRow row;
    try {
      row = evaluate_match(load_model(paths[k], o.input), report.observations, opts);
    } catch (const Error& e) {
      row = MatchRow{};
      row.status = error_kind_name(e.kind());
      row.message = e.what();
    } catch (const std::exception& e) {
      row = MatchRow{};
      row.status = "internal";
      row.message = e.what();
    }
    row.index = k;
    row.file = paths[k];
    rows[k] = std::move(row);
  });

  report.models = rows.size();
  for (const auto& r : rows)
    if (!r.ok()) ++report.failed;
  report.rows = rank_rows(std::move(rows), opts.top);
  write_text_file_atomic(o.output, o.json ? format_match_json(report) : format_match_text(report));
  if (report.failed > 0) {
    std::cerr << "radmode match: " << report.failed << " of " << report.models
              << " models could not be matched (see the failure rows)\n";
    return exit_some_failed;
  }
  return 0;
}

const bool registered = register_command(
    {"match", 70, [](CLI::App& app) -> std::pair<CLI::App*, RunFn> {
       auto opts = std::make_shared<MatchCliOptions>();
       CLI::App* sub = app.add_subcommand(
           "match", "Identify observed periods with the radial modes of models and rank the "
                    "models by chi^2; optionally fit each model's radius (homology)");
       sub->add_option("MODEL", opts->models, "Model table files")->type_name("MODEL...");
       sub->add_option("--list", opts->list,
                       "File listing model paths, one per line (# comments; relative to the "
                       "list's directory)")
           ->type_name("FILE");
       sub->add_option("--observed", opts->observed,
                       "Observation file: one periodicity per line, 'value unit uncertainty "
                       "[label]' (units d h min s uHz c/d; labels F 1O 2O ...)")
           ->type_name("FILE");
       sub->add_option("--period", opts->periods,
                       "One observation on the command line, VALUE UNIT +- SIGMA[:LABEL], e.g. "
                       "0.5421d+-0.0001:F or 21.35uHz+-0.02 (repeatable)")
           ->type_name("SPEC");
       sub->add_option("--count", opts->count,
                       "Modes solved per model (default: max(highest label + 1, observations) "
                       "+ 3)")
           ->type_name("K");
       sub->add_option("--jobs", opts->jobs, "Worker threads (default: all cores)")
           ->type_name("N");
       sub->add_option("--top", opts->top, "Show the N best models (failures always shown)")
           ->type_name("N");
       sub->add_flag("--fit-radius", opts->fit_radius,
                     "Fit each model's radius at fixed mass and structure (periods scale as "
                     "R^(3/2)); report R and the mean density with uncertainties");
       sub->add_flag("--json", opts->json, "Write the report as JSON");
       sub->add_option("-o,--output", opts->output,
                       "Write the report here (temporary name, renamed when complete); - = "
                       "standard output")
           ->type_name("FILE");
       sub->add_option("--surface", opts->surface,
                       "Surface condition: regular (default) or fixed-pressure")
           ->check(CLI::IsMember({"regular", "fixed-pressure"}));
       sub->add_option("--inner", opts->inner,
                       "Inner condition: centre (default) or rigid (envelope model)")
           ->check(CLI::IsMember({"centre", "rigid"}));
       add_model_input_options(sub, opts->input);
       return {sub, [opts] { return run_match(*opts); }};
     }});

} // namespace
} // namespace radmode::cli
