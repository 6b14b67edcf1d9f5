#pragma once
// Reading and writing stellar model tables (docs/table-format.md is the user-facing spec).
//
// Native format (text):
//   - `#` starts a comment (a whole line, or the rest of a data line);
//   - `# key = value` lines are metadata (key: no blanks, `=` or `#`; value: rest of the line,
//     trimmed), kept in file order in StellarModel::metadata and passed through to outputs;
//   - the first line that is not a comment or blank holds the column names;
//   - every later non-blank line is one point: numbers separated by whitespace and/or commas
//     (`1.5e3`, `+2`, Fortran `1.0D+05` all accepted), as many as there are column names;
//   - required columns r m P rho Gamma1; optional T L nabla_ad u; other columns are kept in
//     StellarModel::extra under their full header name;
//   - values are cgs unless a column name carries a bracketed unit, e.g. `r[Rsun]`, `m[Msun]`,
//     `L[Lsun]`, `P[log10]` (see "Units" below);
//   - rows may run centre-first or surface-first (surface-first tables are reversed); the first
//     point may lie at r > 0 (kept as is); a radius may repeat once (discontinuity).
//
// Foreign tables: a column map (ReadOptions::columns, CLI `--columns`) names, for each
// quantity, a column by 1-based number or header name plus a unit; `skip_lines` ignores N
// leading lines. With a map, only the mapped columns are read (others are ignored), and when
// every column is given by number a header line is optional (a first line whose mapped fields
// are all numbers is data).
//
// Units (unit strings, case-sensitive): `` or `cgs` (no conversion, any quantity);
// `cm`, `km`, `Rsun` (r only); `g`, `Msun` (m only); `Lsun` (L only); `log10` (the column holds
// log10 of the cgs value, any quantity); `log10(U)` with U one of the scale units above (the
// column holds log10 of the value in unit U, e.g. `L[log10(Lsun)]`).
//
// Errors: every problem throws radmode::InputError whose message starts "file:line: column N
// (name): " and whose ErrorKind is the failure class (error.hpp); option problems throw
// UsageError.
#include "radmode/model.hpp"

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace radmode {

/// Where one quantity comes from in a foreign table.
struct ColumnSpec {
  std::string source; ///< header name, or 1-based column number written in decimal ("3")
  std::string unit;   ///< unit string (see header comment); empty = cgs
};

/// Options of the table reader. Defaults read the native format.
struct ReadOptions {
  /// quantity (r, m, P, rho, Gamma1, T, L, nabla_ad, u) -> column. Empty: native header names.
  /// When non-empty, r m P rho Gamma1 must all be mapped.
  std::vector<std::pair<std::string, ColumnSpec>> columns;
  std::size_t skip_lines = 0; ///< leading lines ignored before anything else (any content)

  /// Throws UsageError naming the offending item: unknown or repeated quantity, empty source,
  /// column number 0, unit unknown or not valid for the quantity, required quantity unmapped.
  void validate() const;
};

/// Parses a column map "r=2:Rsun,m=3:Msun,P=5,rho=4,Gamma1=9" (items QUANTITY=COLUMN[:UNIT],
/// separated by commas; COLUMN a 1-based number or a header name) and validates it.
/// An empty or all-blank spec gives an empty map (native reading).
/// Throws UsageError naming the bad item.
ReadOptions parse_column_map(const std::string& spec);

/// Parses a table held in memory. `source_name` is used in error messages and stored in
/// StellarModel::source. The result is centre-first and has passed validate_model().
StellarModel parse_model(std::string_view text, const std::string& source_name,
                         const ReadOptions& options = {});

/// Reads a table file in one go and parses it. Error(ErrorKind::io) naming the path when the
/// file cannot be opened or read.
StellarModel read_model(const std::string& path, const ReadOptions& options = {});

/// Parses one number token: optional sign, decimal or exponent notation, Fortran `D`
/// exponents; "inf"/"nan" parse (callers check finiteness). Values below the smallest
/// double become 0 (or a subnormal); values above the largest become +-inf.
/// Returns nullopt unless the whole token is a number.
std::optional<double> parse_number(std::string_view token) noexcept;

// --- Writer (implemented in src/model_write.cpp) -----------------------------------------
//
// format_model writes the native format so that parse_model(format_model(m)) reproduces m
// (every double bit for bit, metadata, extra columns; `line` becomes the new file lines):
//   0. a comment line `# radmode model table`;
//   1. one `# key = value` line per metadata entry, in order;
//   2. one header line: `r m P rho Gamma1`, then those of `T L nabla_ad u` that are present,
//      then the extra column names; all values in cgs (no bracketed units);
//   3. one row per point, centre-first, fields separated by spaces, each number in a form
//      that reads back to the same double (%.17g).
// The model must pass validate_model() (so no NaN or infinity is ever written); metadata keys
// must be non-empty without whitespace, '=' or '#', values single-line, extra column names
// without whitespace, ',' or '#'; otherwise Error(bad_format).

/// The model as native-format text (see above).
std::string format_model(const StellarModel& model);

/// Writes format_model(model) to `path` atomically (temp file + rename, output.hpp); "-" is
/// standard output.
/// Throws Error(ErrorKind::io) naming the path on failure.
void write_model(const StellarModel& model, const std::string& path);

} // namespace radmode
