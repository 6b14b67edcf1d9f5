// radmode: command-line front end. All physics lives in radmode_core; this file only wires
// subcommands (registered by src/cli/cmd_*.cpp) and maps failures to exit codes.
#include "registry.hpp"

#include "radmode/error.hpp"
#include "radmode/version.hpp"

#include <algorithm>
#include <exception>
#include <iostream>

namespace radmode::cli {

namespace {
std::vector<CommandDef>& registry() {
  static std::vector<CommandDef> commands;
  return commands;
}
} // namespace

bool register_command(CommandDef def) {
  registry().push_back(std::move(def));
  return true;
}

const std::vector<CommandDef>& registered_commands() { return registry(); }

} // namespace radmode::cli

int main(int argc, char** argv) {
  using namespace radmode;
  CLI::App app{"radmode: linear adiabatic radial pulsation modes and dynamical stability of "
               "tabulated stellar models"};
  app.set_version_flag("--version", std::string("radmode ") + version);
  app.require_subcommand(1);
  app.fallthrough(false);

  auto commands = cli::registered_commands();
  std::stable_sort(commands.begin(), commands.end(),
                   [](const cli::CommandDef& a, const cli::CommandDef& b) { return a.order < b.order; });
  std::vector<std::pair<CLI::App*, cli::RunFn>> subs;
  for (const auto& def : commands) subs.push_back(def.setup(app));

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int code = app.exit(e);
    // CLI11 uses 0 for --help/--version; every real parse failure is a usage error.
    return code == 0 ? 0 : static_cast<int>(ErrorKind::usage);
  }

  try {
    for (auto& [sub, run] : subs)
      if (sub->parsed()) return run();
  } catch (const Error& e) {
    std::cerr << "radmode: error: " << e.what() << '\n';
    return e.exit_code();
  } catch (const std::exception& e) {
    std::cerr << "radmode: internal error: " << e.what() << '\n';
    return 1;
  }
  return 0;
}
