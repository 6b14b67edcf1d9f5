// radmode join: merges the tables of `radmode track --shard i/N` runs into the table a single
// run writes (same rows, same column union and order, same settings lines).
#include "registry.hpp"
#include "track_output.hpp"

#include "radmode/error.hpp"
#include "radmode/output.hpp"
#include "radmode/track.hpp"

#include <fstream>
#include <iostream>
#include <sstream>

namespace radmode::cli {
namespace {

struct JoinOptions {
  std::vector<std::string> shards;
  std::string output = "-";
  bool json = false;
  bool quiet = false;
};

std::string read_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw Error(ErrorKind::io, path + ": cannot open the shard table");
  std::ostringstream ss;
  ss << in.rdbuf();
  if (in.bad()) throw Error(ErrorKind::io, path + ": read error");
  return ss.str();
}

int run_join(const JoinOptions& o) {
  std::vector<std::pair<std::string, TrackTable>> parts;
  for (const auto& path : o.shards) parts.emplace_back(path, parse_track_csv(read_file(path), path));
  return write_track_result(join_track_tables(parts), o.output, o.json, o.quiet, "join");
}

const bool registered = register_command(
    {"join", 61, [](CLI::App& app) -> std::pair<CLI::App*, RunFn> {
       auto opts = std::make_shared<JoinOptions>();
       auto* sub = app.add_subcommand(
           "join", "Merge the CSV tables of `radmode track --shard i/N` runs into the table of "
                   "one run (every shard of the run is needed)");
       sub->add_option("shards", opts->shards, "Shard tables written by radmode track --shard")
           ->required()
           ->type_name("TABLE");
       sub->add_option("-o,--output", opts->output,
                       "Write the merged table here (temporary name, renamed when complete); "
                       "- = standard output")
           ->type_name("FILE");
       sub->add_flag("--json", opts->json, "Write JSON (rows and the along-track summary)");
       sub->add_flag("-q,--quiet", opts->quiet, "No summary on standard error (the count of failed models is still printed)");
       return {sub, [opts] { return run_join(*opts); }};
     }});

} // namespace
} // namespace radmode::cli
