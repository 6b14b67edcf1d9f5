#include "radmode/error.hpp"

namespace radmode {

const char* error_kind_name(ErrorKind kind) noexcept {
  switch (kind) {
  case ErrorKind::usage: return "usage";
  case ErrorKind::io: return "io";
  case ErrorKind::bad_number: return "bad_number";
  case ErrorKind::not_finite: return "not_finite";
  case ErrorKind::missing_column: return "missing_column";
  case ErrorKind::too_few_points: return "too_few_points";
  case ErrorKind::not_monotonic: return "not_monotonic";
  case ErrorKind::not_positive: return "not_positive";
  case ErrorKind::negative_pressure: return "negative_pressure";
  case ErrorKind::bad_format: return "bad_format";
  case ErrorKind::numerical: return "numerical";
  }
  return "error";
}

std::string Location::prefix() const {
  std::string out;
  if (!file.empty()) out += file;
  if (line > 0) out += (out.empty() ? "line " : ":") + std::to_string(line);
  if (!out.empty()) out += ": ";
  if (column > 0) {
    out += "column " + std::to_string(column);
    if (!column_name.empty()) out += " (" + column_name + ")";
    out += ": ";
  } else if (!column_name.empty()) {
    out += "column " + column_name + ": ";
  }
  return out;
}

} // namespace radmode
