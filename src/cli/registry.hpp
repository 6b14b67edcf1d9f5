#pragma once
// Subcommand registry. Each src/cli/cmd_*.cpp registers itself with a static
// `const bool registered = register_command({...});` so that adding a subcommand touches no
// other file. main.cpp adds them to the CLI11 app in `order`.
#include <CLI/CLI.hpp>

#include <functional>
#include <string>
#include <utility>
#include <vector>

namespace radmode::cli {

/// Runs a parsed subcommand; returns the process exit status. May throw radmode::Error.
using RunFn = std::function<int()>;

struct CommandDef {
  std::string name;
  int order = 100; ///< position in `radmode --help` (lower first)
  /// Adds the subcommand (with its options bound to a struct it owns) to `app`; returns the
  /// subcommand and the function that runs it once parsed.
  std::function<std::pair<CLI::App*, RunFn>(CLI::App& app)> setup;
};

bool register_command(CommandDef def);
const std::vector<CommandDef>& registered_commands();

} // namespace radmode::cli
