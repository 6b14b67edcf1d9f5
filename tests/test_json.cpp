// JSON writer: valid nesting, escapes, round-trip numbers, null for non-finite values.
#include "radmode/json.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <sstream>

using radmode::JsonWriter;

TEST_CASE("nested objects and arrays, compact form") {
  std::ostringstream out;
  JsonWriter j(out, 0);
  j.begin_object().field("a", 1).key("b").begin_array().value(2.5).value("x").null().end_array();
  j.key("c").begin_object().end_object().end_object();
  CHECK(out.str() == R"({"a":1,"b":[2.5,"x",null],"c":{}})");
}

TEST_CASE("numbers round-trip; NaN and infinity become null") {
  CHECK(JsonWriter::number(0.1) == "0.1");
  const double x = 1.0 / 3.0;
  CHECK(std::strtod(JsonWriter::number(x).c_str(), nullptr) == x);
  CHECK(JsonWriter::number(std::numeric_limits<double>::quiet_NaN()) == "null");
  CHECK(JsonWriter::number(std::numeric_limits<double>::infinity()) == "null");
}

TEST_CASE("strings are escaped") {
  CHECK(JsonWriter::quote("a\"b\\c\nd\x01") == R"("a\"b\\c\nd\u0001")");
}
