// Number conversion of the table reader (parse_number in model_io.hpp and the reader's own
// scanning pass) for numbers of 16 to 19 significant digits -- the 17 digits `radmode make`
// writes -- which the reader converts by a 64 x 128-bit product with a truncated power of
// five (Eisel-Lemire) where the compiler has a 128-bit integer type.
//
// Reference: std::from_chars (C++17 [charconv.from.chars]: the value strtod gives in the "C"
// locale; both are correctly rounded in GCC's libstdc++ and glibc), compared bit for bit.
// Hard cases: decimal numbers on, just below and just above the midpoints between two
// neighbouring doubles, whose exact decimal expansions come from glibc's printf (exact for
// any precision; the test checks the trailing zeros that prove it).
#include "radmode/error.hpp"
#include "radmode/model_io.hpp"

#include "support.hpp"

#include <doctest/doctest.h>

#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <memory>
#include <optional>
#include <random>
#include <string>
#include <string_view>
#include <vector>

using namespace radmode;
using radmode::test::bits_of;

namespace {

/// std::from_chars on a token of the reader's grammar: Fortran 'd'/'D' exponents become 'e'
/// and a leading '+' (which from_chars does not take) is dropped first.
double reference(std::string token) {
  for (auto& c : token)
    if (c == 'd' || c == 'D') c = 'e';
  const std::size_t first = !token.empty() && token[0] == '+' ? 1 : 0;
  double v = 0.0;
  const auto res = std::from_chars(token.data() + first, token.data() + token.size(), v);
  REQUIRE_MESSAGE(res.ec == std::errc(), token);
  REQUIRE_MESSAGE(res.ptr == token.data() + token.size(), token);
  return v;
}

/// Writes the integer w (no leading zeros) times 10^e in one of several forms the reader
/// accepts: D.DDDe+X, DDDDeX, positional (point inside or zeros in front), with 'E', 'd' or
/// 'D' exponents, a '+' sign and leading zeros sometimes.
std::string write_decimal(const std::string& w, int e, bool negative, std::mt19937_64& rng) {
  const int n = static_cast<int>(w.size());
  const int magnitude = e + n - 1; // decimal exponent of the first digit
  std::string out = negative ? "-" : (rng() % 8 == 0 ? "+" : "");
  if (rng() % 16 == 0) out += "00";
  const char* exp_marks[] = {"e", "e", "e", "E", "d", "D"};
  const char* mark = exp_marks[rng() % 6];
  switch (rng() % 4) {
  case 0: // D.DDDe+XX
    out += w.substr(0, 1) + "." + w.substr(1) + mark;
    out += (magnitude >= 0 ? (rng() % 2 ? "+" : "") : "") + std::to_string(magnitude);
    break;
  case 1: // DDDDeX
    out += w + mark + std::to_string(e);
    break;
  default: // positional when short enough, else D.DDDe+XX
    if (magnitude >= 0 && magnitude < n - 1)
      out += w.substr(0, static_cast<std::size_t>(magnitude + 1)) + "." +
             w.substr(static_cast<std::size_t>(magnitude + 1));
    else if (magnitude < 0 && magnitude >= -6)
      out += "0." + std::string(static_cast<std::size_t>(-magnitude - 1), '0') + w;
    else
      out += w.substr(0, 1) + "." + w.substr(1) + mark + std::to_string(magnitude);
    break;
  }
  return out;
}

/// Counts tokens whose parse_number result differs from the reference in any bit.
struct Comparison {
  std::size_t checked = 0, mismatches = 0;
  void check(const std::string& token) {
    const auto value = parse_number(token);
    ++checked;
    if (!value) {
      ++mismatches;
      FAIL_CHECK(token << ": not accepted");
      return;
    }
    const double expected = reference(token);
    if (bits_of(*value) != bits_of(expected)) {
      ++mismatches;
      if (mismatches <= 20) {
        char buf[120];
        std::snprintf(buf, sizeof buf, "got %.17g (%016llx), from_chars %.17g (%016llx)", *value,
                      static_cast<unsigned long long>(bits_of(*value)), expected,
                      static_cast<unsigned long long>(bits_of(expected)));
        FAIL_CHECK(token << ": " << buf);
      }
    }
  }
};

/// Random tokens of 16 to 19 significant digits, values between 1e-30 and 1e41.
std::vector<std::string> random_tokens(std::size_t count, std::mt19937_64& rng) {
  std::vector<std::string> out;
  out.reserve(count);
  for (std::size_t i = 0; i < count; ++i) {
    const int n = 16 + static_cast<int>(rng() % 4);
    std::string w(1, static_cast<char>('1' + rng() % 9));
    for (int k = 1; k < n; ++k) w += static_cast<char>('0' + rng() % 10);
    const int magnitude = static_cast<int>(rng() % 71) - 30;
    out.push_back(write_decimal(w, magnitude - n + 1, rng() % 4 == 0, rng));
  }
  return out;
}

/// Digits of an exact decimal expansion "D.DDD...e+X" (printf %.Le) and its exponent;
/// requires at least 30 trailing zeros, which shows the expansion was complete.
void exact_digits(long double x, std::string& digits, int& magnitude) {
  char buf[320];
  std::snprintf(buf, sizeof buf, "%.250Le", x);
  const std::string s(buf);
  const auto e = s.find('e');
  REQUIRE(e != std::string::npos);
  digits = s.substr(0, 1) + s.substr(2, e - 2);
  magnitude = std::atoi(s.c_str() + e + 1);
  const auto last = digits.find_last_not_of('0');
  REQUIRE_MESSAGE(digits.size() - last > 30, s);
  digits.erase(last + 1);
}

/// The decimal integer in `digits` plus one (carry into a new first digit if needed).
std::string plus_one(std::string digits) {
  for (auto it = digits.rbegin(); it != digits.rend(); ++it) {
    if (*it != '9') {
      ++*it;
      return digits;
    }
    *it = '0';
  }
  return "1" + digits;
}

/// Tokens on and around the exact midpoint between the positive double d and the next one
/// up: the complete expansion, and the expansion cut to 16..19 digits (just below the
/// midpoint) and cut plus one unit in the last digit (just above it).
void add_midpoint_tokens(double d, std::vector<std::string>& out, std::mt19937_64& rng) {
  const long double mid =
      (static_cast<long double>(d) + static_cast<long double>(std::nextafter(d, INFINITY))) / 2;
  std::string digits;
  int magnitude = 0;
  exact_digits(mid, digits, magnitude);
  const int n_exact = static_cast<int>(digits.size());
  out.push_back(write_decimal(digits, magnitude - n_exact + 1, false, rng));
  for (int n = 16; n <= 19; ++n) {
    if (n >= n_exact) continue;
    const std::string cut = digits.substr(0, static_cast<std::size_t>(n));
    const int e = magnitude - n + 1;
    out.push_back(write_decimal(cut, e, false, rng));
    const std::string up = plus_one(cut);
    out.push_back(write_decimal(up, e, rng() % 2 == 0, rng));
  }
}

} // namespace

TEST_CASE("16-19 significant digits: random numbers give std::from_chars's double, bit for bit") {
  std::mt19937_64 rng(20261203);
  Comparison cmp;
  for (const auto& token : random_tokens(200000, rng)) cmp.check(token);
  CHECK(cmp.checked == 200000);
  CHECK(cmp.mismatches == 0);
}

TEST_CASE("16-19 significant digits: midpoints between doubles and numbers just beside them") {
  std::mt19937_64 rng(7);
  std::vector<std::string> tokens;
  // Random doubles across the table range 1e-30 .. 1e40 (random significand and exponent).
  for (int i = 0; i < 6000; ++i) {
    const double significand = 1.0 + std::ldexp(static_cast<double>(rng() >> 12), -52);
    const int e2 = static_cast<int>(rng() % 234) - 100; // 2^-100 ~ 8e-31, 2^133 ~ 1.1e40
    add_midpoint_tokens(std::ldexp(significand, e2), tokens, rng);
  }
  // Next to powers of two: the midpoints just below and just above 2^e.
  for (int e2 = -100; e2 <= 133; ++e2) {
    const double p = std::ldexp(1.0, e2);
    add_midpoint_tokens(std::nextafter(p, 0.0), tokens, rng);
    add_midpoint_tokens(p, tokens, rng);
    char buf[40];
    for (const double x : {std::nextafter(p, 0.0), p, std::nextafter(p, INFINITY)})
      for (int prec = 15; prec <= 18; ++prec) {
        std::snprintf(buf, sizeof buf, "%.*e", prec, x);
        tokens.emplace_back(buf);
      }
  }
  // Midpoints with at most 19 digits: M * 2^q with M odd of 54 bits lies halfway between the
  // doubles (M - 1) 2^q and (M + 1) 2^q. M = 2^53 + odd, written as the integer M 2^q
  // (q = 0..9), and M = c 5^j written as c 2^(q-j) "e" j.
  for (int i = 0; i < 2000; ++i) {
    const std::uint64_t m = (std::uint64_t{1} << 53) | (rng() & ((std::uint64_t{1} << 53) - 1)) | 1;
    const int q = static_cast<int>(rng() % 10);
    tokens.push_back(std::to_string(m << q));
    tokens.push_back(std::to_string(m << q) + "e0");
    tokens.push_back("-" + std::to_string(m << q));
  }
  for (int j = 1; j <= 22; ++j) {
    std::uint64_t five_j = 1;
    for (int k = 0; k < j; ++k) five_j *= 5;
    // odd c with c 5^j in [2^53, 2^54)
    const std::uint64_t c_lo = ((std::uint64_t{1} << 53) + five_j - 1) / five_j;
    const std::uint64_t c_hi = ((std::uint64_t{1} << 54) - 1) / five_j;
    if (c_hi < c_lo) continue;
    for (int i = 0; i < 20; ++i) {
      std::uint64_t c = c_lo + rng() % (c_hi - c_lo + 1);
      if (c % 2 == 0) c = c + 1 <= c_hi ? c + 1 : c - 1;
      if (c < c_lo || c % 2 == 0) continue;
      for (int shift = 0;
           shift < 64 && (c << shift) < 10000000000000000000ull && (c << shift) >> shift == c;
           ++shift)
        tokens.push_back(std::to_string(c << shift) + "e" + std::to_string(j));
    }
  }
  // Named cases: 2^53 + 1 (halfway between 2^53 and 2^53 + 2), 10^19 - 1 mantissas, signs,
  // leading zeros and exponent letters.
  for (const char* t : {"9007199254740993",
                        "9007199254740993e0",
                        "9.007199254740993e15",
                        "+9007199254740993",
                        "-9007199254740993",
                        "0009007199254740993",
                        "9007199254740993.000",
                        "9007199254740995",
                        "9007199254740994.9999",
                        "9007199254740993.0001",
                        "18014398509481986",
                        "18014398509481985.9",
                        "-1.8014398509481986E16",
                        "9223372036854775808",
                        "9223372036854775809",
                        "9999999999999999999",
                        "9.999999999999999999",
                        "-9.999999999999999999d-5",
                        "+9.999999999999999999D+30",
                        "0.00001234567890123456789",
                        "1.2448519747378251e+17",
                        "76.385255038846964",
                        "+0.061582114830158206",
                        "1.4248272024588833E-12",
                        "00000000000000000001.234567890123456789"})
    tokens.emplace_back(t);
  for (int e = -46; e <= 21; ++e) {
    tokens.push_back("9999999999999999999e" + std::to_string(e));
    tokens.push_back("-1000000000000000001e" + std::to_string(e));
    tokens.push_back("1844674407370955161e" + std::to_string(e)); // floor(2^64 / 10)
  }
  Comparison cmp;
  for (const auto& token : tokens) cmp.check(token);
  MESSAGE("midpoint cases: " << cmp.checked);
  CHECK(cmp.checked > 50000);
  CHECK(cmp.mismatches == 0);
  // glibc's strtod as a second reference for the same cases.
  std::size_t strtod_mismatches = 0;
  for (const auto& token : tokens) {
    std::string c_token = token;
    for (auto& ch : c_token)
      if (ch == 'd' || ch == 'D') ch = 'e';
    if (bits_of(reference(token)) != bits_of(std::strtod(c_token.c_str(), nullptr)))
      ++strtod_mismatches;
  }
  CHECK(strtod_mismatches == 0);
  // The same tokens in a table column: the reader's own pass, where a number it declines
  // (a tie, a possible carry) or does not convert (more than 19 digits, Fortran exponent)
  // goes to parse_number.
  std::string table = "r m P rho Gamma1 x\n";
  for (std::size_t i = 0; i < tokens.size(); ++i)
    table += std::to_string(i) + " " + std::to_string(i) + " 1 1.5 1.6 " + tokens[i] + "\n";
  const auto model = parse_model(table, "midpoints.txt");
  REQUIRE(model.extra.size() == 1);
  REQUIRE(model.extra[0].second.size() == tokens.size());
  std::size_t row_mismatches = 0;
  for (std::size_t i = 0; i < tokens.size(); ++i)
    if (bits_of(model.extra[0].second[i]) != bits_of(reference(tokens[i]))) ++row_mismatches;
  CHECK(row_mismatches == 0);
}

TEST_CASE("1-19 significant digits with powers of ten at and beyond the ends of the reader's table") {
  // The reader converts w 10^k with w < 2^64 and |k| <= 30 by a 64 x 128-bit product (src/
  // model_read.cpp); these cases sit at its edges: k = +-29..+-32 (the last table entries and
  // the first numbers past them), w >= 2^63, w = 10^19 - 1, w = 2^64 / 10, short w that the
  // exact double path refuses (k > 22 with w 10^(k-22) > 2^53, or k < -22), and values near
  // the largest and smallest normal doubles (past the table: the general path).
  std::mt19937_64 rng(2030);
  std::vector<std::string> tokens;
  for (int k = -32; k <= 32; ++k) {
    const std::string e = "e" + std::to_string(k);
    for (const char* w : {"1", "5", "9", "123456789012345", "9007199254740993", "9223372036854775807",
                          "9223372036854775808", "9223372036854775809", "9999999999999999999",
                          "1844674407370955161", "1000000000000000001", "4503599627370497"})
      tokens.push_back(std::string(w) + e);
    for (int i = 0; i < 300; ++i) {
      const int n = 1 + static_cast<int>(rng() % 19);
      std::string w(1, static_cast<char>('1' + rng() % 9));
      for (int j = 1; j < n; ++j) w += static_cast<char>('0' + rng() % 10);
      tokens.push_back(w + e);
      tokens.push_back(write_decimal(w, k, rng() % 2 == 0, rng));
    }
  }
  // (Subnormal results are left out: std::from_chars reports them out of range.)
  for (const char* t : {"1.7976931348623157e308", "1.7976931348623158e308", "2.2250738585072014e-308",
                        "2.2250738585072017e-308", "-0.0000000000000000000", "0e30", "0e-31"})
    tokens.emplace_back(t);
  Comparison cmp;
  for (const auto& token : tokens) cmp.check(token);
  CHECK(cmp.checked == 65 * (12 + 600) + 7);
  CHECK(cmp.mismatches == 0);
}

TEST_CASE("16-19 significant digits in table rows: the reader's own pass agrees with from_chars") {
  // The same conversion inside parse_model (which does not go through parse_number): random
  // 16-19-digit numbers in an extra column and in P, fields separated by blanks and commas.
  std::mt19937_64 rng(99);
  const auto tokens = random_tokens(20000, rng);
  std::string t = "r m P rho Gamma1 x\n";
  const char* separators[] = {" ", "\t", ",", " , "};
  for (std::size_t i = 0; i < tokens.size(); ++i) {
    const std::string& x = tokens[i];
    const std::string p = x[0] == '-' ? x.substr(1) : x;
    const char* sep = separators[i % 4];
    t += std::to_string(i) + sep + std::to_string(i) + sep + p + sep + "1.5" + sep + "1.6" + sep +
         x + (i % 3 == 0 ? " # note\n" : "\n");
  }
  const auto model = parse_model(t, "digits.txt");
  REQUIRE(model.extra.size() == 1);
  const auto& x = model.extra[0].second;
  REQUIRE(x.size() == tokens.size());
  REQUIRE(model.P.size() == tokens.size());
  std::size_t mismatches = 0;
  for (std::size_t i = 0; i < tokens.size(); ++i) {
    const double expected = reference(tokens[i]);
    if (bits_of(x[i]) != bits_of(expected)) ++mismatches;
    if (bits_of(model.P[i]) != bits_of(std::abs(expected))) ++mismatches;
  }
  CHECK(mismatches == 0);
}

TEST_CASE("One digit before the point: short and long forms agree with from_chars") {
  // The reader takes a single digit followed by '.' (as %.17g writes numbers below 10 and
  // the exponent form) without its multi-digit loads (src/model_read.cpp); these tokens put
  // the point right after the first digit, with and without fraction digits, signs, leading
  // zeros in the fraction, exponents, and more digits than the 19 the reader keeps.
  Comparison cmp;
  for (const char* t : {"0.", "5.", "9.", "-0.", "+3.", "0.5", "-0.5", "+7.25e3", "0.000", "1.e5",
                        "1.E-5", "2.d3", "0.0000000000000000000001234", "0.00000000000000000001",
                        "9.99999999999999999999", "1.2345678901234567890123e10", "0.1e0",
                        "1.6859247519828007e+24", "0.45349832253472372", "1.5492462311557789",
                        "8.9999999999999999e-30", "3.0000000000000000e31", "-0.00000017"})
    cmp.check(t);
  CHECK(cmp.checked == 23);
  CHECK(cmp.mismatches == 0);
  // Not numbers (the reader's grammar, docs/table-format.md "Rows"; std::from_chars refuses
  // them as well, or stops before their end).
  for (const char* t : {"1.5x", "1.e", "1.-5", "1..5", "-.", "0.5e+", "1.5 2"})
    CHECK_MESSAGE(!parse_number(t), t);
}

namespace {

/// parse_number on a copy of `token` in a heap block of exactly its size (no terminating
/// NUL, nothing readable after the last character: an over-read is an ASan error).
std::optional<double> parse_exact_copy(const std::string& token) {
  const std::unique_ptr<char[]> block(new char[token.size()]);
  std::memcpy(block.get(), token.data(), token.size());
  return parse_number(std::string_view(block.get(), token.size()));
}

/// A ten-row table whose last field (Gamma1 of the last row, no newline after it) is `last`,
/// parsed from a heap block of exactly its size.
StellarModel parse_ending_with(const std::string& last) {
  std::string text = "r m P rho Gamma1\n";
  for (int i = 0; i < 10; ++i)
    text += std::to_string(i) + " " + std::to_string(i * i * i) + " " + std::to_string(20 - i) +
            " 2 " + (i < 9 ? "1.6\n" : last);
  const std::unique_ptr<char[]> block(new char[text.size()]);
  std::memcpy(block.get(), text.data(), text.size());
  return parse_model(std::string_view(block.get(), text.size()), "end.txt");
}

} // namespace

TEST_CASE("Digit runs of 1 to 20 digits: eight- and four-digit steps and the byte loop") {
  // The reader takes digits eight, then four, then one at a time (src/model_read.cpp); every
  // run length 1..20 before and after the point, with and without leading zeros, ends each
  // step at every offset. Reference: std::from_chars, bit for bit; each token is parsed from
  // a block of exactly its size (the number ends at the very end of the buffer).
  std::mt19937_64 rng(8);
  const auto digits = [&rng](int n, bool lead_zeros) {
    std::string s;
    for (int i = 0; i < n; ++i)
      s += static_cast<char>(lead_zeros && i < n / 2 ? '0' : '0' + static_cast<int>(rng() % 10));
    return s;
  };
  std::size_t checked = 0, mismatches = 0;
  for (int n = 1; n <= 20; ++n)
    for (int m = 0; m <= 20; ++m)
      for (int variant = 0; variant < 4; ++variant) {
        std::string token = digits(n, variant == 1);
        if (m > 0 || variant == 2) token += "." + digits(m, variant == 3);
        if (variant == 2) token += "e-7";
        const double expected = reference(token);
        const auto value = parse_exact_copy(token);
        ++checked;
        if (!value || bits_of(*value) != bits_of(expected)) {
          ++mismatches;
          FAIL_CHECK(token);
        }
      }
  CHECK(checked == 20 * 21 * 4);
  CHECK(mismatches == 0);
}

TEST_CASE("Digit runs: a non-digit at each of the eight places of a load ends the run there") {
  // Characters just outside '0'..'9' ('/' = 0x2f, ':' = 0x3a, '?' = 0x3f), with the high bit
  // set over a digit (0xb5), NUL, and characters of the grammar that end a run ('.', 'e',
  // blank). A run of 12 digits with the stop character at place j (0..8 from the start of
  // the integer part or of the fraction): the number is either refused, or read up to that
  // character in a table row.
  const std::string run = "123456789012";
  std::size_t refused = 0;
  for (int in_fraction = 0; in_fraction < 2; ++in_fraction)
    for (std::size_t j = 0; j <= 8; ++j)
      for (const char stop : {'/', ':', '?', '\xb5', '\0'}) {
        std::string token = in_fraction ? "7." + run : run;
        const std::size_t at = (in_fraction ? 2 : 0) + j;
        token[at] = stop;
        const auto value = parse_exact_copy(token);
        CHECK_MESSAGE(!value, "place " << j << " char " << int(stop));
        refused += !value;
        // In a table row the field is a bad number (not a shorter number).
        const std::string text = "r m P rho Gamma1\n0 0 10 2 1.6\n1 1 9 " + token + " 1.6\n";
        try {
          (void)parse_model(text, "stop.txt");
          FAIL_CHECK("accepted: place " << j << " char " << int(stop));
        } catch (const InputError& e) {
          CHECK(e.kind() == ErrorKind::bad_number);
        }
      }
  CHECK(refused == 2 * 9 * 5);
  // A blank at each place ends the number there (the rest is the next field; the row then
  // has six fields). '.' or 'e' after the run read so far gives the value of the shorter text.
  for (std::size_t j = 1; j <= 8; ++j) {
    const std::string head = run.substr(0, j);
    for (const std::string& tail : {std::string("."), std::string(".5"), std::string("e2")}) {
      const std::string token = head + tail;
      const auto value = parse_exact_copy(token);
      REQUIRE_MESSAGE(value, token);
      CHECK_MESSAGE(bits_of(*value) == bits_of(reference(token)), token);
    }
    const std::string row = "1 1 " + head + " " + run.substr(j) + " 2 1.6\n";
    try {
      (void)parse_model("r m P rho Gamma1\n0 0 10 2 1.6\n" + row, "blank.txt");
      FAIL_CHECK("six fields accepted: " << row);
    } catch (const InputError& e) {
      CHECK(e.kind() == ErrorKind::bad_format);
    }
  }
}

TEST_CASE("Digit runs: numbers that end the text, 1 to 20 digits") {
  // The last field of a table read from a block that ends right after it (no newline): every
  // length, with a point in several places, leading zeros, and exponents of one to three
  // digits (two-digit exponents have their own step).
  std::mt19937_64 rng(81);
  for (int n = 1; n <= 20; ++n)
    for (int point = -1; point < n; point += 3) {
      std::string token = "1";
      for (int i = 1; i < n; ++i) token += static_cast<char>('0' + rng() % 10);
      if (point >= 0) token.insert(static_cast<std::size_t>(point) + 1, ".");
      for (const std::string& t : {token, "000" + token, token + "e-5", token + "E+33",
                                   token + "e12", token + "e-123"}) {
        const auto model = parse_ending_with(t);
        REQUIRE(model.gamma1.size() == 10);
        CHECK_MESSAGE(bits_of(model.gamma1.back()) == bits_of(reference(t)), t);
      }
    }
}
