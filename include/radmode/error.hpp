#pragma once
// The one error hierarchy of radmode. Bad input or misuse throws an Error; numerical outcomes
// (not converged, order disagreement, ...) are returned as a status inside results instead.
//
// Every ErrorKind maps to its own documented exit code of the radmode program (README,
// "Exit status"). Keep the numbers stable: scripts depend on them.

#include <cstddef>
#include <stdexcept>
#include <string>

namespace radmode {

enum class ErrorKind : int {
  usage = 2,             ///< bad option value or option combination
  io = 3,                ///< file cannot be opened, read or written
  bad_number = 4,        ///< a token that is not a number where a number is expected
  not_finite = 5,        ///< NaN or infinity in a table
  missing_column = 6,    ///< a required column is absent, or a column mapping names none
  too_few_points = 7,    ///< a model with fewer than the minimum number of points
  not_monotonic = 8,     ///< radius or mass not monotonic through the table
  not_positive = 9,      ///< density or Gamma1 <= 0
  negative_pressure = 10,///< pressure < 0
  bad_format = 11,       ///< any other malformed input (header, metadata, observation line)
  numerical = 12,        ///< a computation that cannot deliver what was asked
};

/// Exit codes not tied to an exception: the run completed but its result asks for attention.
inline constexpr int exit_unstable = 20;      ///< model dynamically unstable (opt-in flag)
inline constexpr int exit_some_failed = 21;   ///< batch run where at least one model failed

/// Short machine-readable name of a failure class ("bad_number", ...), used in batch tables.
const char* error_kind_name(ErrorKind kind) noexcept;

/// Root of the hierarchy. what() is a complete, human-readable message.
class Error : public std::runtime_error {
public:
  Error(ErrorKind kind, const std::string& message) : std::runtime_error(message), m_kind(kind) {}
  ErrorKind kind() const noexcept { return m_kind; }
  int exit_code() const noexcept { return static_cast<int>(m_kind); }

private:
  ErrorKind m_kind;
};

/// Misuse: an option with a value outside its allowed range, or incompatible options.
class UsageError : public Error {
public:
  explicit UsageError(const std::string& message) : Error(ErrorKind::usage, message) {}
};

/// Where in an input file a problem sits. line and column are 1-based; 0 means "not known".
struct Location {
  std::string file;
  std::size_t line = 0;
  std::size_t column = 0;       ///< 1-based column (field) number in the table
  std::string column_name;      ///< header name of that column, when known

  /// "file:line: column 3 (P): " style prefix; parts that are unknown are left out.
  std::string prefix() const;
};

/// A problem with the content of an input file; the message starts with its location.
class InputError : public Error {
public:
  InputError(ErrorKind kind, Location where, const std::string& what_was_expected)
      : Error(kind, where.prefix() + what_was_expected), m_where(std::move(where)) {}
  const Location& where() const noexcept { return m_where; }

private:
  Location m_where;
};

} // namespace radmode
