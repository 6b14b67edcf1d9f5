// JSON writer: valid nesting, escapes, round-trip numbers, null for non-finite values.
#include "radmode/json.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <limits>
#include <random>
#include <sstream>
#include <string>

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

TEST_CASE("numbers: the first of %.15g, %.16g, %.17g that reads back, as printf writes it") {
  // Reference: the C library's printf and strtod (the definition of the format), on doubles
  // spread over the whole range (random bit patterns, a fixed seed) and on decimal fractions
  // whose shortest form has 1 to 17 digits.
  auto reference = [](double x) {
    char buf[32];
    for (int prec = 15; prec <= 17; ++prec) {
      std::snprintf(buf, sizeof buf, "%.*g", prec, x);
      if (std::strtod(buf, nullptr) == x) break;
    }
    return std::string(buf);
  };
  std::mt19937_64 bits(20261202);
  int checked = 0, mismatches = 0;
  for (int i = 0; i < 200000; ++i) {
    const std::uint64_t b = bits();
    double x = 0;
    std::memcpy(&x, &b, sizeof x);
    if (!std::isfinite(x)) continue;
    ++checked;
    if (JsonWriter::number(x) != reference(x) && ++mismatches <= 5)
      CHECK(JsonWriter::number(x) == reference(x));
  }
  for (int digits = 1; digits <= 17; ++digits)
    for (int e = -320; e <= 308; e += 7) {
      const double x = std::strtod(("1." + std::string(static_cast<std::size_t>(digits - 1), '3') +
                                    "e" + std::to_string(e)).c_str(),
                                   nullptr);
      ++checked;
      if (JsonWriter::number(x) != reference(x) && ++mismatches <= 5)
        CHECK(JsonWriter::number(x) == reference(x));
      if (JsonWriter::number(-x) != reference(-x) && ++mismatches <= 5)
        CHECK(JsonWriter::number(-x) == reference(-x));
    }
  CHECK(checked > 190000);
  CHECK(mismatches == 0);
  for (const double x : {0.0, -0.0, 1.0, 1e5, 1e15, 1e16, 1e17, 123456789012345678.0, 5e-324,
                         std::numeric_limits<double>::max(), std::numeric_limits<double>::min()})
    CHECK(JsonWriter::number(x) == reference(x));
}

TEST_CASE("strings are escaped") {
  CHECK(JsonWriter::quote("a\"b\\c\nd\x01") == R"("a\"b\\c\nd\u0001")");
}
