#include "track_output.hpp"

#include "radmode/error.hpp"
#include "radmode/output.hpp"

#include <iostream>

namespace radmode::cli {

int write_track_result(const TrackTable& table, const std::string& output, bool json, bool quiet,
                       const std::string& command) {
  const TrackSummary summary = summarize_track(table.rows, table.count);
  write_text_file_atomic(output, json ? format_track_json(table, summary) : format_track_csv(table));
  if (!quiet) std::cerr << format_track_summary(summary);
  if (summary.failed == 0) return 0;
  std::cerr << "radmode " << command << ": " << summary.failed << " of " << summary.models
            << " models failed (see the status and message columns)\n";
  return exit_some_failed;
}

} // namespace radmode::cli
