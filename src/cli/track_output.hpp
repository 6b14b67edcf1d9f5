#pragma once
// Shared ending of `radmode track` and `radmode join`: write the table, print the summary.
#include "radmode/track.hpp"

#include <string>

namespace radmode::cli {

/// Writes `table` to `output` (CSV, or JSON with the along-track summary) atomically, prints
/// the summary on stderr unless `quiet`, and the count of failed models always. Returns 0, or
/// exit_some_failed when a row is not "ok". `command` prefixes the messages ("track").
int write_track_result(const TrackTable& table, const std::string& output, bool json, bool quiet,
                       const std::string& command);

} // namespace radmode::cli
