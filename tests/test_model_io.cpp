// Table reader (model_io.hpp): native format, foreign tables through a column map, every
// failure class with its message and ErrorKind.
#include "radmode/model_io.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/generators.hpp"
#include "support.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <limits>
#include <string>
#include <vector>

using namespace radmode;
using radmode::test::bits_of;

namespace {

std::string num(double x) {
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.17g", x);
  return buf;
}

/// Points of a small invented model, in the units a foreign table would use:
/// r in Rsun, m in Msun, log10 P, rho cgs, Gamma1, L in Lsun. The structure is a
/// uniform-density sphere (P = Pc (1 - x^2), m = M x^3); only the shape matters here.
struct Points {
  std::vector<double> r_sun, m_sun, logP, rho, gamma1, L_sun, X;
};

Points make_points(std::size_t n = 12) {
  Points p;
  for (std::size_t i = 0; i < n; ++i) {
    const double x = double(i) / double(n - 1);
    p.r_sun.push_back(2.5 * x);
    p.m_sun.push_back(1.7 * x * x * x);
    p.logP.push_back(16.0 + std::log10(1.0 - 0.9 * x * x));
    p.rho.push_back(0.15);
    p.gamma1.push_back(5.0 / 3.0);
    p.L_sun.push_back(9.0 * x);
    p.X.push_back(0.7 - 0.01 * x);
  }
  return p;
}

/// Native table in cgs, with metadata and an extra column X.
std::string native_table(const Points& p, bool surface_first = false) {
  std::string t = "# invented test model\n# name = test star\n# Z = 0.02\nr m P rho Gamma1 L X\n";
  const std::size_t n = p.r_sun.size();
  for (std::size_t k = 0; k < n; ++k) {
    const std::size_t i = surface_first ? n - 1 - k : k;
    t += num(p.r_sun[i] * constants::R_sun) + " " + num(p.m_sun[i] * constants::M_sun) + " " +
         num(std::pow(10.0, p.logP[i])) + " " + num(p.rho[i]) + " " + num(p.gamma1[i]) + " " +
         num(p.L_sun[i] * constants::L_sun) + " " + num(p.X[i]) + "\n";
  }
  return t;
}

void check_same(const StellarModel& a, const StellarModel& b) {
  CHECK(a.r == b.r);
  CHECK(a.m == b.m);
  CHECK(a.P == b.P);
  CHECK(a.rho == b.rho);
  CHECK(a.gamma1 == b.gamma1);
  CHECK(a.T == b.T);
  CHECK(a.L == b.L);
  CHECK(a.nabla_ad == b.nabla_ad);
  CHECK(a.u == b.u);
}

/// Runs parse_model and returns the InputError it throws (fails the test if none).
InputError parse_error(const std::string& text, const ReadOptions& opt = {}) {
  try {
    parse_model(text, "bad.txt", opt);
  } catch (const InputError& e) {
    return e;
  }
  FAIL("expected an InputError");
  return InputError(ErrorKind::bad_format, Location{}, "");
}

bool contains(const std::string& s, const std::string& part) {
  return s.find(part) != std::string::npos;
}

/// A valid native table as lines, so that tests can damage one line.
std::vector<std::string> good_lines() {
  std::vector<std::string> lines = {"# key = value", "r m P rho Gamma1"};
  for (int i = 0; i < 12; ++i)
    lines.push_back(std::to_string(i) + " " + std::to_string(i * i) + " " +
                    std::to_string(100 - i) + " 1.5 1.6");
  return lines;
}

std::string join(const std::vector<std::string>& lines) {
  std::string t;
  for (const auto& l : lines) t += l + "\n";
  return t;
}

} // namespace

TEST_CASE("native table: values, line numbers, metadata and extra columns") {
  const auto p = make_points();
  const auto model = parse_model(native_table(p), "star.txt");
  REQUIRE(model.size() == 12);
  CHECK(model.source == "star.txt");
  CHECK(model.line.front() == 5);
  CHECK(model.line.back() == 16);
  CHECK(model.r[3] == p.r_sun[3] * constants::R_sun);
  CHECK(model.P[3] == std::pow(10.0, p.logP[3]));
  CHECK(model.gamma1[0] == 5.0 / 3.0);
  CHECK(model.L.size() == 12);
  CHECK(model.T.empty());
  REQUIRE(model.metadata.size() == 2);
  CHECK(model.metadata[0] == std::make_pair(std::string("name"), std::string("test star")));
  CHECK(model.metadata[1] == std::make_pair(std::string("Z"), std::string("0.02")));
  CHECK(model.meta("Z") == "0.02");
  REQUIRE(model.extra.size() == 1);
  CHECK(model.extra[0].first == "X");
  CHECK(model.extra[0].second == p.X);
  CHECK(model.has_centre());
}

TEST_CASE("metadata lines: key without blanks, '=' or '#'; other comments ignored") {
  auto lines = good_lines();
  lines[0] = "# mass(Msun) = 1.7 ";
  lines.insert(lines.begin(), {"#x=5", "# Note: a = b", "# ==== banner ====", "  # key2 =  "});
  lines.push_back("# trailer = after the rows");
  const auto model = parse_model(join(lines), "meta.txt");
  using KV = std::pair<std::string, std::string>;
  const std::vector<KV> expected = {KV{"x", "5"}, KV{"key2", ""}, KV{"mass(Msun)", "1.7"},
                                    KV{"trailer", "after the rows"}};
  CHECK(model.metadata == expected);

  // A carriage return inside a value cannot be written back: refused with its line.
  lines.back() = "# trailer = a\rb";
  const auto e = parse_error(join(lines));
  CHECK(e.kind() == ErrorKind::bad_format);
  CHECK(contains(e.what(), "bad.txt:19: "));
}

TEST_CASE("surface-first table gives the same centre-first model") {
  const auto p = make_points();
  const auto a = parse_model(native_table(p), "a.txt");
  const auto b = parse_model(native_table(p, true), "b.txt");
  check_same(a, b);
  CHECK(a.extra == b.extra);
  // Line numbers travel with their points: the centre is the last file line in b.
  CHECK(b.line.front() == 16);
  CHECK(b.line.back() == 5);
}

TEST_CASE("units in brackets are converted to cgs") {
  // Conversion factors: IAU 2015 B3 nominal values via constants.hpp.
  std::string t = "r[Rsun] m[Msun] P[log10] rho Gamma1 L[log10(Lsun)] T[cgs] u r2[km]\n";
  for (int i = 0; i < 10; ++i)
    t += std::to_string(i) + " " + std::to_string(i) + " " + std::to_string(10 - i) +
         " 2 1.6 0.5 1e4 3 7\n";
  const auto model = parse_model(t, "u.txt");
  CHECK(model.r[2] == 2.0 * constants::R_sun);
  CHECK(model.r[2] == doctest::Approx(2.0 * 6.957e10));
  CHECK(model.m[3] == 3.0 * constants::M_sun);
  CHECK(model.m[3] == doctest::Approx(3.0 * 1.98841e33).epsilon(1e-5)); // M_sun from memory
  CHECK(model.P[0] == doctest::Approx(1e10));
  CHECK(model.L[0] == doctest::Approx(std::sqrt(10.0) * constants::L_sun));
  CHECK(model.T[0] == 1e4);
  REQUIRE(model.extra.size() == 1);
  CHECK(model.extra[0].first == "r2[km]"); // units of extra columns are not interpreted
  CHECK(model.extra[0].second[0] == 7.0);
}

TEST_CASE("commas, Fortran exponents, signs, blank lines and inline comments") {
  std::string t = "# header follows\n\nr, m, P, rho, Gamma1\n";
  for (int i = 0; i < 10; ++i)
    t += std::to_string(i) + ".0D+00, " + std::to_string(i) + "d0, +1.0E+05,\t2.5D-01 , 1.6  # c\n";
  t += "\n";
  const auto model = parse_model(t, "f.txt");
  CHECK(model.size() == 10);
  CHECK(model.r[9] == 9.0);
  CHECK(model.P[0] == 1e5);
  CHECK(model.rho[0] == 0.25);
  CHECK(model.line[0] == 4);
}

TEST_CASE("Windows line ends are accepted") {
  auto lines = good_lines();
  std::string t;
  for (const auto& l : lines) t += l + "\r\n";
  const auto model = parse_model(t, "crlf.txt");
  CHECK(model.size() == 12);
  CHECK(model.meta("key") == "value");
}

TEST_CASE("an inner point at r > 0 is kept, a repeated radius is accepted") {
  auto lines = good_lines();
  lines[2] = "0.5 0.1 100 1.5 1.6"; // first point off-centre
  lines[7] = "4 16 95 1.2 1.6";     // same r as the previous row: a discontinuity
  const auto model = parse_model(join(lines), "d.txt");
  CHECK(model.r[0] == 0.5);
  CHECK(!model.has_centre());
  CHECK(model.r[4] == model.r[5]);
  CHECK(model.rho[5] == 1.2);
}

TEST_CASE("skip_lines ignores leading lines of any content") {
  const std::string t = "garbage line ! 1 2\nmore garbage\n" + join(good_lines());
  ReadOptions opt;
  opt.skip_lines = 2;
  const auto model = parse_model(t, "s.txt", opt);
  CHECK(model.size() == 12);
  CHECK(model.line[0] == 5);
  CHECK(parse_error(t).kind() == ErrorKind::missing_column);
}

TEST_CASE("foreign table through a column map gives the same model as the native table") {
  const auto p = make_points();
  const auto native = parse_model(native_table(p), "native.txt");

  // Invented foreign layout: two banner lines, a header with other names, columns permuted,
  // extra columns, solar units and log10 pressure.
  std::string t = "== invented evolution code, model 17 ==\nage 1.2e9 yr\n"
                  "zone logP radius mass X density G1 lum\n";
  for (std::size_t i = p.r_sun.size(); i-- > 0;)
    t += "z" + std::to_string(i + 1) + " " + num(p.logP[i]) + " " + num(p.r_sun[i]) + " " +
         num(p.m_sun[i]) + " " + num(p.X[i]) + " " + num(p.rho[i]) + " " + num(p.gamma1[i]) + " " +
         num(p.L_sun[i]) + "\n";

  SUBCASE("by column number") {
    auto opt = parse_column_map("r=3:Rsun, m=4:Msun, P=2:log10, rho=6, Gamma1=7, L=8:Lsun");
    opt.skip_lines = 2;
    const auto foreign = parse_model(t, "foreign.txt", opt);
    check_same(native, foreign);
    CHECK(foreign.extra.empty()); // unmapped columns are not read
    CHECK(foreign.line.front() == 3 + p.r_sun.size());
  }
  SUBCASE("by header name") {
    auto opt = parse_column_map("r=radius:Rsun,m=mass:Msun,P=logP:log10,rho=density,"
                                "Gamma1=G1,L=lum:Lsun");
    opt.skip_lines = 2;
    check_same(native, parse_model(t, "foreign.txt", opt));
  }
  SUBCASE("by number without a header line (the text column is not read)") {
    auto opt = parse_column_map("r=3:Rsun,m=4:Msun,P=2:log10,rho=6,Gamma1=7,L=8:Lsun");
    opt.skip_lines = 3;
    check_same(native, parse_model(t, "foreign.txt", opt));
  }
  SUBCASE("by name without a header line is refused") {
    auto opt = parse_column_map("r=radius:Rsun,m=4:Msun,P=2:log10,rho=6,Gamma1=7");
    opt.skip_lines = 3;
    const auto e = parse_error(t, opt);
    CHECK(e.kind() == ErrorKind::missing_column);
    CHECK(contains(e.what(), "header"));
  }
}

TEST_CASE("column map syntax errors name the bad item") {
  auto usage = [](const std::string& spec) -> std::string {
    try {
      parse_column_map(spec);
    } catch (const UsageError& e) {
      CHECK(e.kind() == ErrorKind::usage);
      return e.what();
    }
    FAIL("expected a UsageError for " << spec);
    return {};
  };
  CHECK(contains(usage("r=1,m=2,P=3,rho4,Gamma1=5"), "'rho4'"));
  CHECK(contains(usage("r=1,m=2,P=3,rho=4,Gamma1=5,Teff=6"), "'Teff'"));
  CHECK(contains(usage("r=1,m=2,P=3,rho=4,Gamma1=5,r=6"), "r mapped twice"));
  CHECK(contains(usage("r=1:Msun,m=2,P=3,rho=4,Gamma1=5"), "'Msun' does not apply to r"));
  CHECK(contains(usage("r=1:furlong,m=2,P=3,rho=4,Gamma1=5"), "'furlong'"));
  CHECK(contains(usage("r=0,m=2,P=3,rho=4,Gamma1=5"), "start at 1"));
  CHECK(contains(usage("r=1,m=2,P=3,rho=4"), "Gamma1"));
  CHECK(contains(usage("r=1:,m=2,P=3,rho=4,Gamma1=5"), "empty unit"));
  CHECK(contains(usage("r=1,,m=2"), "''"));
  CHECK(parse_column_map("  ").columns.empty());
}

TEST_CASE("column map pointing outside the table or reading a column twice") {
  std::string t;
  for (int i = 0; i < 12; ++i) t += std::to_string(i) + " " + std::to_string(i) + " 5 1 1.6\n";
  auto e = parse_error(t, parse_column_map("r=1,m=2,P=3,rho=4,Gamma1=9"));
  CHECK(e.kind() == ErrorKind::missing_column);
  CHECK(contains(e.what(), "bad.txt:1: column 9 (Gamma1)"));
  CHECK(contains(e.what(), "only 5 columns"));
  CHECK_THROWS_AS(parse_model(t, "x", parse_column_map("r=1,m=2,P=3,rho=4,Gamma1=4")), UsageError);
  CHECK(parse_model(t, "x", parse_column_map("r=1,m=2,P=3,rho=4,Gamma1=5")).size() == 12);
}

TEST_CASE("every failure class: ErrorKind and a message naming file, line and column") {
  SUBCASE("non-numeric token") {
    auto lines = good_lines();
    lines[5] = "3 9 97 1.5x 1.6";
    const auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::bad_number);
    CHECK(contains(e.what(), "bad.txt:6: column 4 (rho): expected a number, found '1.5x'"));
    CHECK(e.where().line == 6);
    CHECK(e.where().column == 4);
  }
  SUBCASE("NaN and infinity") {
    auto lines = good_lines();
    lines[4] = "2 4 nan 1.5 1.6";
    auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::not_finite);
    CHECK(contains(e.what(), "bad.txt:5: column 3 (P)"));
    lines[4] = "2 4 98 1.5 -inf";
    e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::not_finite);
    CHECK(contains(e.what(), "bad.txt:5: column 5 (Gamma1)"));
    lines[4] = "2 4 1e999 1.5 1.6"; // overflows a double
    CHECK(parse_error(join(lines)).kind() == ErrorKind::not_finite);
  }
  SUBCASE("log10 value that overflows after conversion") {
    std::string t = "r m P[log10] rho Gamma1\n";
    for (int i = 0; i < 12; ++i) t += std::to_string(i) + " " + std::to_string(i) + " 400 1 1.6\n";
    const auto e = parse_error(t);
    CHECK(e.kind() == ErrorKind::not_finite);
    CHECK(contains(e.what(), "bad.txt:2: column 3 (P[log10])"));
  }
  SUBCASE("missing required column") {
    auto lines = good_lines();
    lines[1] = "r m P rho G1";
    const auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::missing_column);
    CHECK(contains(e.what(), "bad.txt:2: "));
    CHECK(contains(e.what(), "Gamma1"));
  }
  SUBCASE("no header line") {
    auto lines = good_lines();
    lines.erase(lines.begin() + 1);
    const auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::missing_column);
    CHECK(contains(e.what(), "bad.txt:2: column 1: expected a header line"));
  }
  SUBCASE("empty file") {
    CHECK(parse_error("").kind() == ErrorKind::missing_column);
    CHECK(parse_error("# only a comment\n\n").kind() == ErrorKind::missing_column);
  }
  SUBCASE("too few points") {
    auto lines = good_lines();
    lines.resize(2 + 9);
    const auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::too_few_points);
    CHECK(contains(e.what(), "bad.txt: "));
    CHECK(contains(e.what(), "at least 10 points, found 9"));
  }
  SUBCASE("non-monotonic radius and mass") {
    auto lines = good_lines();
    lines[6] = "3.5 16 96 1.5 1.6"; // r: 3, 3.5, then 3.2 on file line 8
    lines[7] = "3.2 25 95 1.5 1.6";
    auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::not_monotonic);
    CHECK(contains(e.what(), "bad.txt:8: column 1 (r)"));
    lines = good_lines();
    lines[7] = "5 10 95 1.5 1.6";
    e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::not_monotonic);
    CHECK(contains(e.what(), "bad.txt:8: column 2 (m)"));
  }
  SUBCASE("radius repeated three times") {
    auto lines = good_lines();
    lines[6] = "4 16 96 1.5 1.6";
    lines[7] = "4 16 95 1.5 1.6";
    lines[8] = "4 16 94 1.5 1.6";
    const auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::not_monotonic);
    CHECK(contains(e.what(), "bad.txt:9: column 1 (r)"));
  }
  SUBCASE("non-positive density and Gamma1") {
    auto lines = good_lines();
    lines[9] = "7 49 93 0 1.6";
    auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::not_positive);
    CHECK(contains(e.what(), "bad.txt:10: column 4 (rho): expected rho > 0"));
    lines[9] = "7 49 93 1.5 -1";
    e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::not_positive);
    CHECK(contains(e.what(), "bad.txt:10: column 5 (Gamma1)"));
  }
  SUBCASE("negative pressure, column named as in the header") {
    auto lines = good_lines();
    lines[1] = "r m P[cgs] rho Gamma1";
    lines[10] = "8 64 -1e-3 1.5 1.6";
    const auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::negative_pressure);
    CHECK(contains(e.what(), "bad.txt:11: column 3 (P[cgs]): expected P >= 0"));
  }
  SUBCASE("ragged row names the line") {
    auto lines = good_lines();
    lines[8] = "6 36 94 1.5";
    auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::bad_format);
    CHECK(contains(e.what(), "bad.txt:9: expected 5 fields as in the header (line 2), found 4"));
    lines[8] = "6 36 94 1.5 1.6 7";
    e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::bad_format);
    CHECK(contains(e.what(), "found 6"));
  }
  SUBCASE("repeated column and bad unit in the header") {
    auto lines = good_lines();
    lines[1] = "r m P rho Gamma1 r[Rsun]";
    auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::bad_format);
    CHECK(contains(e.what(), "bad.txt:2: column 6 (r[Rsun]): quantity r given twice"));
    lines[1] = "r m[Rsun] P rho Gamma1";
    e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::bad_format);
    CHECK(contains(e.what(), "bad.txt:2: column 2 (m[Rsun])"));
  }
}

TEST_CASE("read_model: file errors are io errors naming the path") {
  test::TempDir dir;
  for (const auto& path : {dir.file("missing.txt"), dir.path()}) {
    try {
      read_model(path);
      FAIL("expected an io error");
    } catch (const InputError& e) {
      CHECK(e.kind() == ErrorKind::io);
      CHECK(contains(e.what(), path));
    }
  }
  const auto file = dir.file("ok.txt");
  test::write_text(file, join(good_lines()));
  const auto model = read_model(file);
  CHECK(model.source == file);
  CHECK(model.size() == 12);
}

TEST_CASE("parse_number accepts the usual number forms and nothing else") {
  CHECK(parse_number("1.5") == 1.5);
  CHECK(parse_number("+2") == 2.0);
  CHECK(parse_number("-3e2") == -300.0);
  CHECK(parse_number("1.0D+05") == 1e5);
  CHECK(parse_number("2.5d-1") == 0.25);
  CHECK(parse_number(".5") == 0.5);
  CHECK(parse_number("1e-400") == 0.0);
  CHECK(std::isinf(*parse_number("1e400")));
  CHECK(std::isnan(*parse_number("nan")));
  for (const char* bad : {"", "+", "+-1", "1e", "1.2.3", "abc", "1,5", "D5", "1D", "0x10", "1e5x"})
    CHECK_MESSAGE(!parse_number(bad), bad);
}

TEST_CASE("write then read gives back the same model") {
  SUBCASE("a read table with metadata, optional and extra columns") {
    const auto p = make_points();
    const auto a = parse_model(native_table(p), "a.txt");
    const auto b = parse_model(format_model(a), "b.txt");
    check_same(a, b);
    CHECK(a.extra == b.extra);
    CHECK(a.metadata == b.metadata);
  }
  SUBCASE("generated models, through a file") {
    // The Eddington standard model has T, nabla_ad and u; the polytrope ends at rho = P = 0.
    test::TempDir dir;
    for (const auto& model : {make_polytrope(3.0), make_standard_model(), make_uniform()}) {
      const auto path = dir.file("model.txt");
      write_model(model, path);
      const auto back = read_model(path);
      check_same(model, back);
      CHECK(model.metadata == back.metadata);
      CHECK(back.source == path);
    }
  }
}

namespace {

/// The C library's conversion (strtod, "C" locale) of a token in the reader's grammar, as the
/// outside reference: Fortran 'D' exponents become 'e' first.
double strtod_reference(std::string token) {
  for (auto& c : token)
    if (c == 'd' || c == 'D') c = 'e';
  return std::strtod(token.c_str(), nullptr);
}

/// Tokens covering the shortcut of the reader (<= 15 digits, moderate exponents) and the
/// general path (16 to 25 digits, large and tiny exponents, subnormals, ties), with signs,
/// leading zeros, Fortran exponents and points in every place.
std::vector<std::string> number_tokens() {
  std::vector<std::string> out = {"0",
                                  "-0",
                                  "+0",
                                  "0.0",
                                  "-0.0e5",
                                  "0e99999",
                                  "00012.5000",
                                  "000.000125",
                                  "1.",
                                  ".5",
                                  "-.5",
                                  "9007199254740992",
                                  "9007199254740993",
                                  "9007199254740995",
                                  "90071992547409930e-1",
                                  "4503599627370497.5",
                                  "1e22",
                                  "1e23",
                                  "123456789012345e10",
                                  "8.98846567431158e307",
                                  "1.7976931348623157e308",
                                  "2.2250738585072014e-308",
                                  "2.2250738585072011e-308",
                                  "4.9406564584124654e-324",
                                  "2.4703282292062328e-324",
                                  "1e-320",
                                  "1.0D+05",
                                  "-2.5d-3",
                                  "+6.02214076E+23",
                                  "0.30000000000000004",
                                  "1234567890123456789",
                                  "12345678901234567890",
                                  "1.2345678901234567890123e-7",
                                  "0.000000000000000000000000000000000000001",
                                  "1e-22",
                                  "1e-23"};
  char buf[400];                               // %.3f of 1e308 has 313 characters
  std::uint64_t state = 0x2545f4914f6cdd1dULL; // xorshift64 (Marsaglia 2003)
  auto next = [&state] {
    state ^= state << 13;
    state ^= state >> 7;
    state ^= state << 17;
    return state;
  };
  // Eight printf forms: %.17g %.16e %.15g %.8e %.6g %.3f %.10E %.1e
  auto print = [&buf](int form, double v) {
    const int digits[8] = {17, 16, 15, 8, 6, 3, 10, 1};
    const int d = digits[form];
    switch (form) {
    case 0:
    case 2:
    case 4:
      std::snprintf(buf, sizeof buf, "%.*g", d, v);
      break;
    case 5:
      std::snprintf(buf, sizeof buf, "%.*f", d, v);
      break;
    case 6:
      std::snprintf(buf, sizeof buf, "%.*E", d, v);
      break;
    default:
      std::snprintf(buf, sizeof buf, "%.*e", d, v);
      break;
    }
    return std::string(buf);
  };
  for (int i = 0; i < 20000; ++i) {
    // A double spread over the whole range (random bits, finite only).
    double x = 0;
    const std::uint64_t b = next();
    std::memcpy(&x, &b, sizeof x);
    if (!std::isfinite(x)) continue;
    out.push_back(print(i % 8, x));
    // Moderate magnitudes as in stellar tables.
    const double y = std::ldexp(double(next() >> 11), -53) * std::pow(10.0, int(next() % 80) - 40);
    out.push_back(print((i + 3) % 8, y));
    // Random digit strings: 1 to 25 digits, a point somewhere, an exponent sometimes.
    std::string s = (next() % 3 == 0) ? "-" : "";
    const int n = 1 + int(next() % 25);
    const int point = int(next() % std::uint64_t(n + 1));
    for (int k = 0; k < n; ++k) {
      if (k == point) s += '.';
      s += char('0' + next() % 10);
    }
    if (next() % 2 == 0) s += (next() % 4 == 0 ? "D" : "e") + std::to_string(int(next() % 90) - 45);
    out.push_back(s);
  }
  return out;
}

} // namespace

TEST_CASE("parse_number gives the C library's double, bit for bit") {
  // Reference: strtod (ISO C, correctly rounded in glibc); every double bit and the sign of
  // zero must agree, for the shortcut and for the general path.
  std::size_t checked = 0;
  for (const auto& token : number_tokens()) {
    const auto value = parse_number(token);
    REQUIRE_MESSAGE(value, token);
    const double expected = strtod_reference(token);
    if (bits_of(*value) != bits_of(expected))
      FAIL_CHECK(token << ": got " << num(*value) << ", strtod " << num(expected));
    ++checked;
  }
  CHECK(checked > 59000);
  // Text the shortcut must not take (the general path rejects all of it).
  for (const char* bad : {"-", "+.", ".", "1e+", "1e-", "1d", "1.5e5.5", "--1", "+-1", "1+",
                          "1e5e5", "1_000", "0x1p3", "infx", "NaNx", "1.5 "})
    CHECK_MESSAGE(!parse_number(bad), bad);
}

TEST_CASE("table rows: every field form gives the C library's double") {
  // Every token of number_tokens() placed in the P column of a valid table (other columns
  // fixed), rows separated by any mix of blanks, tabs, commas, CRLF and inline comments.
  const auto tokens = number_tokens();
  const char* separators[] = {" ", "\t", ",", " , ", "\t\t", "  "};
  std::string t = "r m P rho Gamma1\r\n";
  std::vector<double> expected;
  std::size_t i = 0;
  for (const auto& token : tokens) {
    const char* sep = separators[i % 6];
    const double p = std::abs(strtod_reference(token));
    if (!(p <= 1e300)) continue; // keep the table valid (no inf)
    t += std::to_string(i) + sep + std::to_string(i) + sep +
         (token[0] == '-' ? token.substr(1) : token) + sep + "1.5" + sep + "1.6";
    t += (i % 5 == 0) ? "# note\r\n" : (i % 7 == 0 ? "\r\n" : "\n");
    expected.push_back(p);
    ++i;
  }
  t.pop_back(); // no newline after the last row
  const auto model = parse_model(t, "forms.txt");
  REQUIRE(model.P.size() == expected.size());
  std::size_t mismatches = 0;
  for (std::size_t k = 0; k < expected.size(); ++k)
    if (bits_of(model.P[k]) != bits_of(expected[k])) ++mismatches;
  CHECK(mismatches == 0);
  CHECK(model.line.back() == expected.size() + 1);
}

TEST_CASE("table rows: long lines, missing final newline, junk after a number") {
  SUBCASE("a 300-digit number and 100,000 blanks in a row") {
    auto lines = good_lines();
    lines[3] = "1 " + std::string(100000, ' ') + "1 0." + std::string(297, '0') + "99e300\t1.5 1.6";
    const auto model = parse_model(join(lines), "long.txt");
    CHECK(model.P[1] == 990.0); // 0.(297 zeros)99 = 99e-299, times 1e300
    CHECK(model.line[1] == 4);
  }
  SUBCASE("last row without a newline, with a trailing comment and CR") {
    std::string t = join(good_lines());
    t.pop_back();
    t += " # end\r";
    const auto model = parse_model(t, "tail.txt");
    CHECK(model.size() == 12);
    CHECK(model.gamma1.back() == 1.6);
  }
  SUBCASE("junk glued to a number is a bad number, naming line and column") {
    for (const char* junk :
         {"1.5x", "1.5e", "1.5e+", "1.5.5", "1.5-", "1.5D", "+-1.5", "1.5e5x", "0x15", "1.5\v9"}) {
      auto lines = good_lines();
      lines[6] = std::string("4 16 96 ") + junk + " 1.6";
      const auto text = join(lines);
      if (std::string(junk) == "1.5\v9") {
        // A vertical tab separates fields: six fields instead of five.
        CHECK(parse_error(text).kind() == ErrorKind::bad_format);
        continue;
      }
      const auto e = parse_error(text);
      CHECK_MESSAGE(e.kind() == ErrorKind::bad_number, junk);
      CHECK_MESSAGE(contains(e.what(), "bad.txt:7: column 4 (rho): expected a number"), junk);
    }
  }
  SUBCASE("number directly followed by a comment") {
    auto lines = good_lines();
    lines[6] = "4 16 96 1.25#comment";
    lines[7] = "5 25 95 1.5,1.6#";
    auto e = parse_error(join(lines));
    CHECK(e.kind() == ErrorKind::bad_format); // four fields in line 7
    CHECK(contains(e.what(), "bad.txt:7: expected 5 fields as in the header (line 2), found 4"));
    lines[6] = "4 16 96 1.25 1.5#comment";
    const auto model = parse_model(join(lines), "c.txt");
    CHECK(model.rho[4] == 1.25);
    CHECK(model.gamma1[4] == 1.5);
  }
  SUBCASE("inf and nan spellings are rejected as not finite") {
    for (const char* word : {"inf", "-inf", "+inf", "infinity", "INF", "nan", "NaN", "-nan"}) {
      auto lines = good_lines();
      lines[8] = std::string("6 36 94 1.5 ") + word;
      const auto e = parse_error(join(lines));
      CHECK_MESSAGE(e.kind() == ErrorKind::not_finite, word);
      CHECK_MESSAGE(contains(e.what(), "bad.txt:9: column 5 (Gamma1)"), word);
    }
  }
  SUBCASE("too many fields are counted in the message") {
    auto lines = good_lines();
    lines[9] = "7 49 93 1.5 1.6 8 9,10";
    const auto e = parse_error(join(lines));
    CHECK(contains(e.what(), "bad.txt:10: expected 5 fields as in the header (line 2), found 8"));
  }
}

TEST_CASE("validate_model: every defect at every position is refused, valid edge cases pass") {
  // The rules of model.hpp (validate_model), applied to a small valid model with an optional
  // column, one defect at a time at the first, second, a middle, the second-last and the last
  // point. validate_model checks all rows in one quick pass first and looks for the offending
  // point only when that pass fails: this makes sure the quick pass misses nothing.
  const std::size_t n = 12;
  StellarModel good;
  for (std::size_t i = 0; i < n; ++i) {
    const double x = double(i) / double(n - 1);
    good.r.push_back(7e10 * x);
    good.m.push_back(2e33 * x * x * x);
    good.P.push_back(1e17 * (1.0 - x * x));          // 0 at the surface
    good.rho.push_back(i + 1 == n ? 0.0 : 1.4);      // 0 at the zero-pressure surface
    good.gamma1.push_back(5.0 / 3.0);
    good.T.push_back(1e7 * (1.0 - x) + 1e3);
  }
  good.source = "valid.txt";
  CHECK_NOTHROW(validate_model(good));
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double inf = std::numeric_limits<double>::infinity();
  using Column = std::vector<double> StellarModel::*;
  const std::pair<const char*, Column> columns[] = {
      {"r", &StellarModel::r},     {"m", &StellarModel::m},           {"P", &StellarModel::P},
      {"rho", &StellarModel::rho}, {"Gamma1", &StellarModel::gamma1}, {"T", &StellarModel::T}};
  for (const std::size_t i : {std::size_t{0}, std::size_t{1}, n / 2, n - 2, n - 1})
    for (const auto& entry : columns)
      for (const double bad : {nan, inf, -inf}) {
        const char* const name = entry.first; // (not a structured binding: INFO captures it)
        const Column column = entry.second;
        StellarModel m = good;
        (m.*column)[i] = bad;
        INFO("column " << name << ", point " << i << ", value " << bad);
        CHECK_THROWS_AS(validate_model(m), InputError);
      }
  for (const std::size_t i : {std::size_t{0}, std::size_t{1}, n / 2, n - 2, n - 1}) {
    INFO("point " << i);
    StellarModel m = good;
    m.P[i] = -1.0;
    CHECK_THROWS_AS(validate_model(m), InputError);
    m = good;
    m.gamma1[i] = 0.0;
    CHECK_THROWS_AS(validate_model(m), InputError);
    m = good;
    m.m[i] = -1.0;
    CHECK_THROWS_AS(validate_model(m), InputError);
    m = good;
    m.rho[i] = -1.0;
    CHECK_THROWS_AS(validate_model(m), InputError);
    if (i + 1 < n) { // rho = 0 is allowed only at the surface point, and there only with P = 0
      m = good;
      m.rho[i] = 0.0;
      CHECK_THROWS_AS(validate_model(m), InputError);
    }
    if (i > 0) { // r and m must not decrease
      m = good;
      m.r[i] = m.r[i - 1] * 0.999 - 1.0;
      CHECK_THROWS_AS(validate_model(m), InputError);
      m = good;
      m.m[i] = m.m[i - 1] * 0.999 - 1.0;
      CHECK_THROWS_AS(validate_model(m), InputError);
    }
    if (i > 0 && i + 1 < n) { // P = 0 inside is allowed (P >= 0)
      m = good;
      m.P[i] = 0.0;
      CHECK_NOTHROW(validate_model(m));
    }
  }
  StellarModel m = good;
  m.P.back() = 1.0; // rho = 0 at the surface needs P = 0 there
  CHECK_THROWS_AS(validate_model(m), InputError);
  m = good;
  m.r[6] = m.r[5]; // a discontinuity: two rows at one radius is fine, three are not
  CHECK_NOTHROW(validate_model(m));
  m.r[7] = m.r[5];
  m.m[7] = m.m[6];
  CHECK_THROWS_AS(validate_model(m), InputError);
  m = good;
  m.r[0] = -1.0;
  CHECK_THROWS_AS(validate_model(m), InputError);
  m = good;
  m.m.back() = 0.0; // total mass must be positive
  for (double& v : m.m) v = 0.0;
  CHECK_THROWS_AS(validate_model(m), InputError);
}

TEST_CASE("rows read straight from the text and rows read line by line give the same model") {
  // The reader takes rows whose every field it converts while scanning without looking for
  // the line end first, and hands every other line to the line-by-line path (src/model_read.cpp,
  // read_plain_row). Here plain rows alternate with rows that need the other path (a Fortran
  // exponent, a comment after the last field, CR line ends, blank and comment lines, commas),
  // and the first row is much longer than the others, so that the value arrays, sized from
  // it, are grown while rows go either way. Expected values: std::strtod of each field (the C
  // library, correctly rounded), line numbers counted by hand.
  std::string text = "r m P rho Gamma1\n";
  std::vector<double> r, m, p, rho;
  std::vector<std::size_t> lines;
  std::size_t line = 1;
  const auto add = [&](const std::string& row, double ri, double mi, double pi, double rhoi) {
    text += row;
    ++line;
    r.push_back(ri);
    m.push_back(mi);
    p.push_back(pi);
    rho.push_back(rhoi);
    lines.push_back(line);
  };
  add("0.000000000000000000000000000000000000000000000000000000000000 0 " + std::string(300, '0') +
          "1000 1.000000000000000000000000000000000000000 1.6\n",
      0.0, 0.0, 1000.0, 1.0);
  for (int i = 1; i < 400; ++i) {
    const std::string ri = std::to_string(i), mi = std::to_string(i * i);
    const double pi = 1000.0 - i, rhoi = std::strtod(("1." + ri).c_str(), nullptr);
    switch (i % 7) {
    case 0: add(ri + " " + mi + " " + std::to_string(1000 - i) + "D0 1." + ri + " 1.6\n", i,
                i * i, pi, rhoi); break;
    case 1: add(ri + " " + mi + " " + std::to_string(1000 - i) + " 1." + ri + " 1.6 # c\n", i,
                i * i, pi, rhoi); break;
    case 2: add(ri + "," + mi + "," + std::to_string(1000 - i) + ",1." + ri + ",1.6\r\n", i,
                i * i, pi, rhoi); break;
    case 3:
      text += i % 2 ? "\n" : "  # comment\n";
      ++line;
      [[fallthrough]];
    default: add(ri + " " + mi + " " + std::to_string(1000 - i) + " 1." + ri + " 1.6\n", i,
                 i * i, pi, rhoi); break;
    }
  }
  text.pop_back(); // no newline after the last row
  const auto model = parse_model(text, "mixed.txt");
  REQUIRE(model.size() == r.size());
  std::size_t mismatches = 0;
  for (std::size_t k = 0; k < r.size(); ++k)
    mismatches += model.r[k] != r[k] || model.m[k] != m[k] || model.P[k] != p[k] ||
                  model.rho[k] != rho[k] || model.gamma1[k] != 1.6 || model.line[k] != lines[k];
  CHECK(mismatches == 0);
}
