// Error hierarchy: messages carry their location, exit codes are distinct per failure class.
#include "radmode/error.hpp"

#include <doctest/doctest.h>

#include <set>

using namespace radmode;

TEST_CASE("InputError message names file, line and column") {
  Location loc{"star.txt", 12, 3, "P"};
  InputError e(ErrorKind::bad_number, loc, "expected a number, found 'abc'");
  CHECK(std::string(e.what()) == "star.txt:12: column 3 (P): expected a number, found 'abc'");
  CHECK(e.exit_code() == 4);
  CHECK(e.where().line == 12);
}

TEST_CASE("every failure class has its own non-zero exit code and name") {
  const ErrorKind kinds[] = {ErrorKind::usage,          ErrorKind::io,
                             ErrorKind::bad_number,     ErrorKind::not_finite,
                             ErrorKind::missing_column, ErrorKind::too_few_points,
                             ErrorKind::not_monotonic,  ErrorKind::not_positive,
                             ErrorKind::negative_pressure, ErrorKind::bad_format,
                             ErrorKind::numerical};
  std::set<int> codes;
  std::set<std::string> names;
  for (auto k : kinds) {
    Error e(k, "x");
    CHECK(e.exit_code() != 0);
    CHECK(e.exit_code() != 1);
    codes.insert(e.exit_code());
    names.insert(error_kind_name(k));
  }
  CHECK(codes.size() == std::size(kinds));
  CHECK(names.size() == std::size(kinds));
  CHECK(codes.count(exit_unstable) == 0);
  CHECK(codes.count(exit_some_failed) == 0);
}
