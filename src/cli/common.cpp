#include "common.hpp"

#include "radmode/error.hpp"
#include "radmode/model_io.hpp"

namespace radmode::cli {

void add_model_input_options(CLI::App* sub, ModelInputOptions& opts) {
  sub->add_option("--columns", opts.columns,
                  "Read a foreign table: map quantities to columns, QUANTITY=COLUMN[:UNIT],... "
                  "with COLUMN a 1-based number or header name and UNIT one of cgs, cm, km, "
                  "Rsun, g, Msun, Lsun, log10, log10(UNIT). Required: r m P rho Gamma1; "
                  "optional: T L nabla_ad u. Example: r=2:Rsun,m=3:Msun,P=5:log10,rho=4,Gamma1=9")
      ->type_name("SPEC");
  sub->add_option("--skip", opts.skip, "Ignore the first N lines of the table (N >= 0)")
      ->type_name("N")
      ->check(
          [](const std::string& value) -> std::string {
            const bool digits = !value.empty() && value.size() <= 18 &&
                                value.find_first_not_of("0123456789") == std::string::npos;
            return digits ? std::string() : "expected a whole number >= 0, found '" + value + "'";
          },
          "");
}

StellarModel load_model(const std::string& path, const ModelInputOptions& opts) {
  ReadOptions read;
  try {
    read = parse_column_map(opts.columns);
  } catch (const UsageError& e) {
    throw UsageError(std::string("--columns: ") + e.what());
  }
  read.skip_lines = opts.skip;
  try {
    return read_model(path, read);
  } catch (const UsageError& e) {
    throw UsageError(std::string("--columns: ") + e.what());
  }
}

} // namespace radmode::cli
