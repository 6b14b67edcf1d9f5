// `radmode make`: writes a generated reference model (include/radmode/generators.hpp) as a
// native model table.
//   radmode make polytrope --index N [--gamma1 G]
//   radmode make uniform [--gamma1 G]
//   radmode make standard [--mu MU]
// each with --mass (M_sun), --radius (R_sun), --points, --output FILE (default: standard
// output). The table records the effective options as the `command` metadata line.
#include "registry.hpp"

#include "radmode/error.hpp"
#include "radmode/generators.hpp"
#include "radmode/json.hpp"
#include "radmode/model_io.hpp"

#include <memory>
#include <string>

namespace radmode::cli {

namespace {

enum class Kind { polytrope, uniform, standard };

struct MakeArgs {
  GeneratorOptions options;
  double index = 0;
  long long points = 2000; ///< signed, so that a negative value is reported as typed
  std::string output = "-";
};

std::string num(double x) { return JsonWriter::number(x); }

void add_common(CLI::App* sub, MakeArgs& a) {
  sub->add_option("--mass", a.options.mass_msun, "total mass in M_sun (1e-3 .. 1e4)")
      ->capture_default_str();
  sub->add_option("--radius", a.options.radius_rsun, "radius in R_sun (1e-6 .. 1e5)")
      ->capture_default_str();
  sub->add_option("--points", a.points,
                  "number of mesh points, centre and surface included (10 .. 10000000)")
      ->capture_default_str();
  sub->add_option("--output", a.output, "output file (written atomically); - = standard output")
      ->capture_default_str();
}

/// The effective options as a command line that regenerates the same table.
std::string command_text(Kind kind, const MakeArgs& a) {
  std::string cmd = "radmode make ";
  switch (kind) {
  case Kind::polytrope:
    cmd += "polytrope --index " + num(a.index) + " --gamma1 " + num(a.options.gamma1);
    break;
  case Kind::uniform: cmd += "uniform --gamma1 " + num(a.options.gamma1); break;
  case Kind::standard: cmd += "standard --mu " + num(a.options.mu); break;
  }
  cmd += " --mass " + num(a.options.mass_msun) + " --radius " + num(a.options.radius_rsun) +
         " --points " + std::to_string(a.options.points);
  if (a.output != "-") cmd += " --output " + a.output;
  return cmd;
}

int run_make(Kind kind, MakeArgs a) {
  if (a.points < 0)
    throw UsageError("number of points (--points) = " + std::to_string(a.points) +
                     " is out of range; expected a positive count (see --help)");
  a.options.points = static_cast<std::size_t>(a.points);
  StellarModel model;
  switch (kind) {
  case Kind::polytrope: model = make_polytrope(a.index, a.options); break;
  case Kind::uniform: model = make_uniform(a.options); break;
  case Kind::standard: model = make_standard_model(a.options); break;
  }
  // after generator and description
  const auto pos = model.metadata.begin() + (model.metadata.size() >= 2 ? 2 : 0);
  model.metadata.insert(pos, {"command", command_text(kind, a)});
  write_model(model, a.output);
  return 0;
}

std::pair<CLI::App*, RunFn> setup(CLI::App& app) {
  auto args = std::make_shared<MakeArgs>();
  auto kind = std::make_shared<Kind>(Kind::polytrope);
  CLI::App* make = app.add_subcommand(
      "make", "write a reference model table: polytrope, uniform sphere or Eddington standard "
              "model");
  make->require_subcommand(1);

  CLI::App* poly = make->add_subcommand(
      "polytrope", "polytrope of index n (Lane-Emden) with constant Gamma1");
  poly->add_option("--index", args->index, "polytropic index n (0 .. 4.9)")->required();
  poly->add_option("--gamma1", args->options.gamma1, "constant Gamma1 (1 < Gamma1 <= 10)")
      ->capture_default_str();
  add_common(poly, *args);
  poly->callback([kind] { *kind = Kind::polytrope; });

  CLI::App* uni = make->add_subcommand("uniform", "uniform-density sphere with constant Gamma1");
  uni->add_option("--gamma1", args->options.gamma1, "constant Gamma1 (1 < Gamma1 <= 10)")
      ->capture_default_str();
  add_common(uni, *args);
  uni->callback([kind] { *kind = Kind::uniform; });

  CLI::App* std_model = make->add_subcommand(
      "standard", "Eddington standard model: n = 3, constant gas-pressure fraction beta from "
                  "Eddington's quartic, ideal gas + radiation (columns T, nabla_ad, u too)");
  std_model->add_option("--mu", args->options.mu, "mean molecular weight (0.2 .. 4)")
      ->capture_default_str();
  add_common(std_model, *args);
  std_model->callback([kind] { *kind = Kind::standard; });

  return {make, [args, kind] { return run_make(*kind, *args); }};
}

const bool registered = register_command({"make", 10, setup});

} // namespace

} // namespace radmode::cli
