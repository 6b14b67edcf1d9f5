#pragma once
// Options shared by every subcommand that reads a model table (inspect, modes, track, match).
#include "radmode/model.hpp"

#include <CLI/CLI.hpp>

#include <cstddef>
#include <string>

namespace radmode::cli {

/// How to read a model table: native format by default, or a foreign table through a column
/// map (model_io.hpp, docs/table-format.md).
struct ModelInputOptions {
  std::string columns;  ///< --columns SPEC, e.g. "r=2:Rsun,m=3:Msun,P=5,rho=4,Gamma1=9"
  std::size_t skip = 0; ///< --skip N: leading lines ignored
};

/// Adds --columns SPEC and --skip N to `sub`, bound to `opts`.
void add_model_input_options(CLI::App* sub, ModelInputOptions& opts);

/// Reads and checks the model at `path` as `opts` says. Throws UsageError naming --columns for
/// a bad map, InputError for a bad table (kind = failure class).
StellarModel load_model(const std::string& path, const ModelInputOptions& opts);

} // namespace radmode::cli
