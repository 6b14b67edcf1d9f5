#pragma once
// Writing result files safely: content goes to a temporary file in the same directory,
// which is renamed over the final name only when complete, so an interrupted or failed run
// never leaves a partial file under the final name.
#include <string>

namespace radmode {

/// Writes `text` to `path` atomically (temp file + rename). "-" writes to standard output.
/// Throws Error(ErrorKind::io) naming the path when the file cannot be written.
void write_text_file_atomic(const std::string& path, const std::string& text);

} // namespace radmode
