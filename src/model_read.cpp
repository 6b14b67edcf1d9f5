// Table reader: native format and foreign tables through a column map (model_io.hpp).
// One pass over the text held in memory; numbers converted in the scanning pass where that is
// provably exact, otherwise by std::from_chars; no per-number allocation.
#include "radmode/model_io.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"

#include <algorithm>
#include <cerrno>
#include <cfloat>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <limits>
#include <memory>

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

namespace radmode {

namespace {

// --- Quantities and units -----------------------------------------------------------------

struct Quantity {
  const char* name;
  std::vector<double> StellarModel::*member;
  bool required;
};

constexpr std::size_t n_quantities = 9;
const Quantity quantities[n_quantities] = {
    {"r", &StellarModel::r, true},           {"m", &StellarModel::m, true},
    {"P", &StellarModel::P, true},           {"rho", &StellarModel::rho, true},
    {"Gamma1", &StellarModel::gamma1, true}, {"T", &StellarModel::T, false},
    {"L", &StellarModel::L, false},          {"nabla_ad", &StellarModel::nabla_ad, false},
    {"u", &StellarModel::u, false}};

constexpr std::size_t not_a_quantity = n_quantities;

std::size_t quantity_index(std::string_view name) {
  for (std::size_t q = 0; q < n_quantities; ++q)
    if (name == quantities[q].name) return q;
  return not_a_quantity;
}

std::string quantity_list() {
  std::string out;
  for (const auto& q : quantities) out += (out.empty() ? "" : " ") + std::string(q.name);
  return out;
}

/// value_cgs = log10 ? 10^(x) * factor : x * factor
struct Unit {
  bool log10 = false;
  double factor = 1.0;
};

struct ScaleUnit {
  const char* name;
  std::size_t quantity; // not_a_quantity: valid for every quantity
  double factor;
};

const ScaleUnit scale_units[] = {
    {"cgs", not_a_quantity, 1.0},  {"cm", 0, 1.0}, {"km", 0, 1.0e5},
    {"Rsun", 0, constants::R_sun}, {"g", 1, 1.0},  {"Msun", 1, constants::M_sun},
    {"Lsun", 6, constants::L_sun}};

/// Parses a unit string for quantity q; on failure returns nullopt and sets `why`.
std::optional<Unit> parse_unit(std::string_view text, std::size_t q, std::string& why) {
  Unit unit;
  std::string_view scale = text;
  if (text == "log10") {
    unit.log10 = true;
    return unit;
  }
  if (text.size() > 7 && text.substr(0, 6) == "log10(" && text.back() == ')') {
    unit.log10 = true;
    scale = text.substr(6, text.size() - 7);
  }
  if (scale.empty() && !unit.log10) return unit;
  for (const auto& s : scale_units) {
    if (scale != s.name) continue;
    if (s.quantity != not_a_quantity && s.quantity != q) {
      why = "unit '" + std::string(text) + "' does not apply to " + quantities[q].name +
            " (it is a unit of " + quantities[s.quantity].name + ")";
      return std::nullopt;
    }
    unit.factor = s.factor;
    return unit;
  }
  why = "unknown unit '" + std::string(text) +
        "'; expected cgs, cm, km, Rsun (r), g, Msun (m), Lsun (L), log10 or log10(UNIT)";
  return std::nullopt;
}

bool is_column_number(std::string_view s) {
  return !s.empty() && s.size() <= 9 &&
         std::all_of(s.begin(), s.end(), [](char c) { return c >= '0' && c <= '9'; });
}

std::size_t column_number(std::string_view s) {
  std::size_t n = 0;
  std::from_chars(s.data(), s.data() + s.size(), n);
  return n;
}

std::string_view trim(std::string_view s) {
  const char* ws = " \t\r\v\f";
  const auto b = s.find_first_not_of(ws);
  if (b == std::string_view::npos) return {};
  const auto e = s.find_last_not_of(ws);
  return s.substr(b, e - b + 1);
}

// --- Fast decimal-to-double conversion ----------------------------------------------------
//
// A table number of up to 15 significant digits with a moderate exponent is converted in the
// same pass that finds the end of the field: w <= 2^53 and 10^|k| <= 10^22 are exact doubles,
// so one IEEE multiplication or division gives the correctly rounded w * 10^k (Clinger 1990,
// "How to read floating point numbers accurately", PLDI). Other numbers of up to 19
// significant digits with |k| <= 30 (among them the 17 digits the writer uses) are converted
// by a 64 x 128-bit product with a truncated power of five (eisel_lemire below), which knows
// when its result could be off and then declines. Every other number goes to
// std::from_chars, so the result is always the double std::from_chars gives.

bool is_digit(char c) {
  return static_cast<unsigned char>(c - '0') < 10;
}

// Eight (then four) digits at a time from one 64-bit (32-bit) load, on little-endian machines
// (first character in the lowest byte); elsewhere one digit at a time.
#if defined(__BYTE_ORDER__) && defined(__ORDER_LITTLE_ENDIAN__)
constexpr bool eight_at_a_time = __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__;
#else
constexpr bool eight_at_a_time = false;
#endif

std::uint64_t load8(const char* p) {
  std::uint64_t v = 0;
  std::memcpy(&v, p, sizeof v);
  return v;
}

/// The byte b repeated in every byte of U.
template <class U>
constexpr U every_byte(unsigned b) {
  return static_cast<U>(static_cast<U>(~U{0}) / 0xffu * b);
}

/// Every byte of v (8 or 4 bytes of text) in '0'...'9': high nibble 3, and adding 6 to the
/// low nibble does not carry.
template <class U>
bool all_digits(U v) {
  constexpr U high = every_byte<U>(0xf0), threes = every_byte<U>(0x30);
  return (v & high) == threes && static_cast<U>((v + every_byte<U>(0x06)) & high) == threes;
}

/// The value of eight digit bytes: neighbouring digits, then pairs, then quadruples combined
/// in place (no lane overflows: 99, 9999 and 99999999 fit their 8-, 16- and 32-bit lanes).
/// Each step x * (B 2^s + 1) >> s adds B times a lane to its upper neighbour in one
/// multiplication (the digits' low nibbles first: every byte is a digit). From memory, the
/// form used by Lemire's parsers.
std::uint64_t eight_digit_value(std::uint64_t v) {
  v = ((v & every_byte<std::uint64_t>(0x0f)) * (10 * 0x100 + 1)) >> 8;
  v = ((v & 0x00ff00ff00ff00ffu) * (100 * 0x10000 + 1)) >> 16;
  return ((v & 0x0000ffff0000ffffu) * (10000 * 0x100000000u + 1)) >> 32;
}

/// The same for four digit bytes.
std::uint32_t four_digit_value(std::uint32_t v) {
  v = ((v & every_byte<std::uint32_t>(0x0f)) * (10 * 0x100 + 1)) >> 8;
  return ((v & 0x00ff00ffu) * (100 * 0x10000 + 1)) >> 16;
}

constexpr int max_digits = 19; // 10^19 - 1 < 2^64

/// Appends the digits at p to w; zeros before the first significant digit are skipped.
/// `place` counts every digit read, `digits` the significant ones (those beyond max_digits
/// are read but not added; the caller then leaves the number to std::from_chars).
inline void read_digits(const char*& p, const char* end, std::uint64_t& w, int& digits,
                        int& place) {
  const char* start = p;
  if (digits == 0)
    while (p != end && *p == '0') ++p;
  if (eight_at_a_time) {
    while (end - p >= 8) {
      const std::uint64_t v = load8(p);
      if (!all_digits(v)) break;
      if (digits + 8 <= max_digits) w = w * 100000000u + eight_digit_value(v);
      digits += 8;
      p += 8;
    }
    // Then four at a time once (a tail of 4-7 digits is common after the eights: 15
    // fraction digits), then one at a time.
    if (end - p >= 4) {
      std::uint32_t v = 0;
      std::memcpy(&v, p, sizeof v);
      if (all_digits(v)) {
        if (digits + 4 <= max_digits) w = w * 10000u + four_digit_value(v);
        digits += 4;
        p += 4;
      }
    }
  }
  for (; p != end && is_digit(*p); ++p)
    if (++digits <= max_digits) w = w * 10 + static_cast<std::uint64_t>(*p - '0');
  place += static_cast<int>(p - start);
}

/// w * 10^k exactly rounded when both factors are exact doubles (w <= 2^53, possibly after
/// moving powers of ten from 10^k into w while w stays <= 2^53); false otherwise.
bool exact_product(std::uint64_t w, int k, bool negative, double& out) {
  static constexpr double pow10[23] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                       1e8,  1e9,  1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
                                       1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
  if (w == 0) {
    out = negative ? -0.0 : 0.0;
    return true;
  }
#if FLT_EVAL_METHOD == 0 // double arithmetic rounds to double (no wider intermediates)
  constexpr std::uint64_t two53 = std::uint64_t{1} << 53;
  if (w > two53 || k < -22) return false;
  for (; k > 22; --k) {
    if (w > two53 / 10) return false;
    w *= 10;
  }
  const double x = static_cast<double>(w);
  const double v = k < 0 ? x / pow10[-k] : x * pow10[k];
  out = negative ? -v : v;
  return true;
#else
  return false;
#endif
}

// Correctly rounded w * 10^k for any w < 2^64 and |k| <= max_table_power (Eisel-Lemire;
// Lemire 2021, "Number parsing at a gigabyte per second", Software: Practice and Experience
// 51(8)), used where exact_product does not apply: the 16-19 digits `radmode make` writes.
//
// 5^k is held as a 128-bit number T = 5^k 2^s scaled into [2^127, 2^128): exact for k >= 0
// (5^30 < 2^70), truncated for k < 0. With w shifted left so that its top bit is set
// (w' = w 2^z), the 192-bit product P = w' T is the exact product when k >= 0 and otherwise
// lies below it by less than w' < 2^64 units of its lowest bit. The double is the top 53 bits
// of the product rounded to nearest by the 54th (the round bit) and the bits below it (the
// rest). Since the exact product is in [P, P + 2^64), the rounding read off P is the exact
// one unless
//  - the rest of P lies within 2^64 of the next round-bit step: bits of the high word below
//    the round bit all ones and the middle word all ones (a carry could reach the round bit),
//  - or the round bit is 1 and the rest of P is zero: for k >= 0 this is an exact tie (ties
//    go to the even significand); for k < 0 the exact value is a little above P, which we
//    leave to std::from_chars as well.
// Both cases return false (std::from_chars decides). The result is a normal double for every
// w and |k| <= max_table_power (1e-30 <= w 10^k < 2^64 1e30), checked anyway.
#ifdef __SIZEOF_INT128__
__extension__ typedef unsigned __int128 u128;

constexpr int max_table_power = 30;

/// 5^k scaled into [2^127, 2^128) and the power of two that scales it: T = 5^k 2^shift.
struct PowerOfFive {
  std::uint64_t high = 0, low = 0;
  int shift = 0;
};

constexpr int bit_length(u128 x) {
  int n = 0;
  for (; x != 0; x >>= 1) ++n;
  return n;
}

/// Generates the table: 5^k exactly for k >= 0; for k < 0 the first 128 bits of the binary
/// expansion of 1 / 5^-k (long division, bit by bit), i.e. floor(2^shift / 5^-k).
struct PowersOfFive {
  PowerOfFive entry[2 * max_table_power + 1] = {};
  constexpr PowersOfFive() {
    for (int k = -max_table_power; k <= max_table_power; ++k) {
      u128 five_k = 1;
      for (int i = 0; i < (k < 0 ? -k : k); ++i) five_k *= 5;
      u128 t = 0;
      int shift = 0;
      if (k >= 0) {
        shift = 128 - bit_length(five_k);
        t = five_k << shift;
      } else {
        // Quotient bits of 2^j / 5^-k for j = 0, 1, ... until 128 bits from the first one.
        u128 remainder = 1;
        int bits = 0;
        while (bits < 128) {
          const bool one = remainder >= five_k;
          if (one) remainder -= five_k;
          if (bits > 0 || one) {
            t = (t << 1) | u128{one};
            ++bits;
          }
          remainder <<= 1;
          ++shift;
        }
        shift -= 1; // the last quotient bit has weight 2^-(shift - 1)
      }
      PowerOfFive& e = entry[k + max_table_power];
      e.high = static_cast<std::uint64_t>(t >> 64);
      e.low = static_cast<std::uint64_t>(t);
      e.shift = shift;
    }
  }
};
constexpr PowersOfFive powers_of_five;

bool eisel_lemire(std::uint64_t w, int k, bool negative, double& out) {
  if (k < -max_table_power || k > max_table_power || w == 0) return false;
  const PowerOfFive& t = powers_of_five.entry[k + max_table_power];
  const int z = __builtin_clzll(w);
  w <<= z;
  const u128 upper = u128{w} * t.high; // bits 64..191 of P, without the carry from below
  // P < 2^192 has its top bit at 191 or 190; keep 54 bits (53 + the round bit).
  std::uint64_t high = static_cast<std::uint64_t>(upper >> 64);
  int rest_bits = 9 + static_cast<int>(high >> 63);
  std::uint64_t m = high >> rest_bits; // in [2^53, 2^54)
  // The low product w t.low adds less than 2^64 to bits 64..127, so at most 1 to `high`. When
  // the high word's bits below the round bit are neither all zeros nor all ones, that carry
  // changes neither m nor the top bit, the decline below needs a middle word of all ones (not
  // reachable after a carry) and the tie test needs those bits zero: the low product changes
  // nothing and is formed only otherwise (about 2 numbers in 512). Tested on the lowest 9 of
  // those 9 or 10 bits (all zeros or all ones: (bits + 1) & 0x1fe == 0), which holds whenever
  // the test on all of them does, without waiting for the top bit.
  if (((high + 1) & 0x1feu) == 0) {
    const u128 lower = u128{w} * t.low; // bits 0..127 of P
    const u128 middle_sum = (upper & ~std::uint64_t{0}) + (lower >> 64);
    const std::uint64_t low = static_cast<std::uint64_t>(lower);
    const std::uint64_t middle = static_cast<std::uint64_t>(middle_sum);
    high += static_cast<std::uint64_t>(middle_sum >> 64);
    rest_bits = 9 + static_cast<int>(high >> 63);
    const std::uint64_t rest_mask = (std::uint64_t{1} << rest_bits) - 1;
    const std::uint64_t rest_high = high & rest_mask;
    if (rest_high == rest_mask && middle == ~std::uint64_t{0}) return false;
    m = high >> rest_bits;
    if ((rest_high | middle | low) == 0 && (m & 1) != 0) { // (the rare test first: no guess)
      if (k < 0) return false;
      if ((m & 2) == 0) m -= 1; // a tie: down to the even significand
    }
  }
  m = (m + 1) >> 1; // rounded to 53 bits; may carry to 2^53
  // w 10^k = P 2^(k - z - shift); P ~ m 2^(128 + rest_bits + 1).
  int exponent = k - z - t.shift + 128 + rest_bits + 1 + 52; // of the leading bit
  if (m == std::uint64_t{1} << 53) {
    m >>= 1;
    ++exponent;
  }
  const int biased = exponent + 1023;
  if (biased <= 0 || biased >= 2047) return false;
  const std::uint64_t bits = (std::uint64_t{negative} << 63) |
                             (static_cast<std::uint64_t>(biased) << 52) |
                             (m & ((std::uint64_t{1} << 52) - 1));
  std::memcpy(&out, &bits, sizeof out);
  return true;
}
#else
bool eisel_lemire(std::uint64_t, int, bool, double&) {
  return false; // no 128-bit multiplication: std::from_chars converts
}
#endif

/// What scan_number found: the end of the number and its value, or stop == nullptr when the
/// number was not converted in the scanning pass (no digits, a Fortran exponent, more than 19
/// significant digits, an exponent out of the fast range, a declined rounding: parse_number
/// decides). Returned in two registers.
struct Scanned {
  const char* stop;
  double value;
};

/// Reads the longest prefix of [p, end) of the form [+-]digits[.digits][(e|E)[+-]digits]
/// (at least one mantissa digit) and converts it when that is certain to give std::from_chars's
/// double.
Scanned scan_number(const char* p, const char* end) {
  constexpr Scanned not_converted{nullptr, 0.0};
  bool negative = false;
  if (p != end && (*p == '-' || *p == '+')) {
    negative = *p == '-';
    ++p;
  }
  std::uint64_t w = 0;
  int digits = 0; // significant digits
  int place = 0;  // digits read
  if (end - p >= 2 && is_digit(p[0]) && p[1] == '.') {
    // One digit before the point (as %.17g writes numbers below 10 and the exponent form):
    // no multi-digit loads that would end at the point.
    w = static_cast<std::uint64_t>(p[0] - '0');
    digits = w != 0;
    place = 1;
    ++p;
  } else {
    read_digits(p, end, w, digits, place);
  }
  int k = 0; // decimal exponent of w's last digit
  if (p != end && *p == '.') {
    ++p;
    const int before_point = place;
    read_digits(p, end, w, digits, place);
    k = before_point - place;
  }
  if (place == 0) return not_converted;
  if (p != end && (*p == 'e' || *p == 'E')) {
    ++p;
    bool exp_negative = false;
    if (p != end && (*p == '-' || *p == '+')) {
      exp_negative = *p == '-';
      ++p;
    }
    if (p == end || !is_digit(*p)) return not_converted; // "1e" is not a number
    int e = 0;
    if (end - p >= 3 && is_digit(p[1]) && !is_digit(p[2])) {
      // Two exponent digits (as %.17g writes them): no loop.
      e = (p[0] - '0') * 10 + (p[1] - '0');
      p += 2;
    } else {
      for (; p != end && is_digit(*p); ++p)
        if (e < 100000) e = e * 10 + (*p - '0');
    }
    k += exp_negative ? -e : e;
  }
  double out = 0.0;
  if (digits <= max_digits &&
      (exact_product(w, k, negative, out) || eisel_lemire(w, k, negative, out)))
    return Scanned{p, out};
  return not_converted;
}

// --- Lines and fields ---------------------------------------------------------------------

/// Field separators: whitespace other than the line end, and commas.
struct BlankTable {
  bool blank[256] = {};
  constexpr BlankTable() {
    for (const char c : {' ', '\t', '\r', '\v', '\f', ','})
      blank[static_cast<unsigned char>(c)] = true;
  }
};
constexpr BlankTable blank_table;

bool is_blank_char(char c) {
  return blank_table.blank[static_cast<unsigned char>(c)];
}

/// Splits a line into fields (separators: whitespace and commas; `#` ends the line).
class FieldCursor {
public:
  explicit FieldCursor(std::string_view line)
      : m_p(line.data()), m_end(line.data() + line.size()) {}
  bool next(std::string_view& field) {
    while (m_p < m_end && is_blank_char(*m_p)) ++m_p;
    if (m_p == m_end || *m_p == '#') return false;
    const char* start = m_p;
    while (m_p < m_end && !is_blank_char(*m_p) && *m_p != '#') ++m_p;
    field = std::string_view(start, static_cast<std::size_t>(m_p - start));
    return true;
  }

private:
  const char* m_p;
  const char* m_end;
};

enum class LineType { blank, comment, content };

LineType classify(std::string_view line) {
  for (char c : line) {
    if (c == '#') return LineType::comment;
    if (!is_blank_char(c)) return LineType::content;
  }
  return LineType::blank;
}

/// Metadata keys: any run of characters other than blanks, `=` and `#`.
bool is_key_char(char c) {
  return c != ' ' && c != '\t' && c != '\r' && c != '\v' && c != '\f' && c != '=' && c != '#';
}

/// `# key = value` -> (key, value); other comments -> nullopt.
std::optional<std::pair<std::string, std::string>> metadata_of(std::string_view line) {
  line = trim(line);
  if (line.empty() || line[0] != '#') return std::nullopt;
  line = trim(line.substr(1));
  std::size_t k = 0;
  while (k < line.size() && is_key_char(line[k])) ++k;
  if (k == 0) return std::nullopt;
  const std::string_view rest = trim(line.substr(k));
  if (rest.empty() || rest[0] != '=') return std::nullopt;
  return std::make_pair(std::string(line.substr(0, k)), std::string(trim(rest.substr(1))));
}

// --- Reading ------------------------------------------------------------------------------

/// What one field of a row feeds.
struct Target {
  std::size_t slot = 0; ///< index into the value arrays; `ignored` when the field is not read
  Unit unit;
  bool scaled = false; ///< unit.log10 or unit.factor != 1 (the value needs converting)
};
constexpr std::size_t ignored = static_cast<std::size_t>(-1);

struct Slot {
  std::size_t quantity = not_a_quantity; ///< not_a_quantity: an extra column
  std::size_t column = 0;                ///< 1-based field number
  std::string name;                      ///< header name (or quantity name without header)
  std::vector<double> values;
};

class TableReader {
public:
  TableReader(std::string_view text, const std::string& source, const ReadOptions& options)
      : m_text(text), m_source(source), m_options(options) {}

  StellarModel read();

private:
  Location at(std::size_t line, std::size_t column = 0, const std::string& name = {}) const {
    return Location{m_source, line, column, name};
  }
  bool next_line(std::string_view& line);
  void set_up_native(std::string_view header);
  void set_up_mapped(std::string_view first, bool& first_is_data);
  void read_row(std::string_view line);
  /// The row that starts at `p` when it is plain: every field a number that scan_number
  /// converts, exactly as many fields as targets, blanks between them, then the line end; its
  /// values are stored in place and the position after its line is returned. Anything else
  /// (a comment, a blank line, a field for parse_number, a field count that does not match,
  /// no room for the row) returns nullptr having counted nothing: the general path
  /// (next_line, classify, read_row) then reads the same line again.
  const char* read_plain_row(const char* p);
  /// Room for at least one more row in every value array and in the line numbers.
  void grow(std::string_view line);
  /// Converts the field starting at `begin` for `target` into `out` (its place in the row
  /// being read); returns the end of the field.
  const char* store(const Target& target, std::size_t column, const char* begin,
                    const char* line_end, double& out);
  StellarModel assemble();

  std::string_view m_text;
  std::size_t m_pos = 0;
  std::size_t m_line_no = 0; ///< 1-based number of the line last returned by next_line
  const std::string& m_source;
  const ReadOptions& m_options;

  std::vector<std::pair<std::string, std::string>> m_metadata;
  std::vector<Target> m_targets; ///< one per field of a row
  std::vector<Slot> m_slots;
  std::vector<std::size_t> m_lines;
  std::size_t m_header_line = 0;
  // Rows are written in place: every value array (and m_lines) is sized m_capacity, checked
  // once per row; row i goes to m_out[slot][i]; assemble() cuts the arrays to m_rows.
  std::vector<double*> m_out;
  std::size_t m_rows = 0;
  std::size_t m_capacity = 0;
  /// Every field of a row is read, without a unit: rows may go through read_plain_row.
  bool m_plain_targets = false;
};

bool TableReader::next_line(std::string_view& line) {
  if (m_pos >= m_text.size()) return false;
  const std::size_t nl = m_text.find('\n', m_pos);
  const std::size_t end = nl == std::string_view::npos ? m_text.size() : nl;
  line = m_text.substr(m_pos, end - m_pos);
  m_pos = end + 1;
  ++m_line_no;
  return true;
}

void TableReader::set_up_native(std::string_view header) {
  m_header_line = m_line_no;
  FieldCursor cur(header);
  std::string_view field;
  std::size_t column = 0;
  std::size_t found[n_quantities];
  std::fill(std::begin(found), std::end(found), std::size_t{0});
  while (cur.next(field)) {
    ++column;
    std::string name(field);
    std::string_view base = field;
    std::string_view unit_text;
    const auto open = field.find('[');
    if (open != std::string_view::npos && field.back() == ']') {
      base = field.substr(0, open);
      unit_text = field.substr(open + 1, field.size() - open - 2);
    }
    if (parse_number(field))
      throw InputError(ErrorKind::missing_column, at(m_line_no, column),
                       "expected a header line of column names (required: r m P rho Gamma1), "
                       "found the number '" +
                           name + "'; a table without a header needs a column map (--columns)");
    const std::size_t q = quantity_index(base);
    Target target;
    if (q == not_a_quantity) {
      // Extra column: kept under its full name, values as written.
      for (const auto& s : m_slots)
        if (s.name == name)
          throw InputError(ErrorKind::bad_format, at(m_line_no, column, name),
                           "column name repeated (first in column " + std::to_string(s.column) +
                               ")");
    } else {
      if (found[q] != 0)
        throw InputError(ErrorKind::bad_format, at(m_line_no, column, name),
                         std::string("quantity ") + quantities[q].name +
                             " given twice (first in column " + std::to_string(found[q]) + ")");
      found[q] = column;
      std::string why;
      const auto unit = parse_unit(unit_text, q, why);
      if (!unit) throw InputError(ErrorKind::bad_format, at(m_line_no, column, name), why);
      target.unit = *unit;
      target.scaled = unit->log10 || unit->factor != 1.0;
    }
    target.slot = m_slots.size();
    m_targets.push_back(target);
    Slot slot;
    slot.quantity = q;
    slot.column = column;
    slot.name = std::move(name);
    m_slots.push_back(std::move(slot));
  }
  std::string missing;
  for (std::size_t q = 0; q < n_quantities; ++q)
    if (quantities[q].required && found[q] == 0)
      missing += (missing.empty() ? "" : ", ") + std::string(quantities[q].name);
  if (!missing.empty()) {
    std::string names;
    for (const auto& s : m_slots) names += (names.empty() ? "" : " ") + s.name;
    throw InputError(ErrorKind::missing_column, at(m_line_no),
                     "missing required column(s) " + missing + " in the header line '" + names +
                         "' (required: r m P rho Gamma1; optional: T L nabla_ad u)");
  }
}

void TableReader::set_up_mapped(std::string_view first, bool& first_is_data) {
  std::vector<std::string_view> fields;
  {
    FieldCursor cur(first);
    std::string_view field;
    while (cur.next(field)) fields.push_back(field);
  }
  const bool by_name_needed =
      std::any_of(m_options.columns.begin(), m_options.columns.end(),
                  [](const auto& c) { return !is_column_number(c.second.source); });
  if (by_name_needed) {
    // The first content line must be the header.
    if (std::all_of(fields.begin(), fields.end(),
                    [](std::string_view f) { return bool(parse_number(f)); }))
      throw InputError(ErrorKind::missing_column, at(m_line_no),
                       "the column map names columns by header name, but this first table "
                       "line holds only numbers; expected a header line (or map columns by "
                       "number)");
    first_is_data = false;
  } else {
    // Every column by number: the first content line is data when all its mapped fields are
    // numbers (unmapped fields may hold text), otherwise a header.
    first_is_data =
        std::all_of(m_options.columns.begin(), m_options.columns.end(), [&fields](const auto& c) {
          const std::size_t k = column_number(c.second.source);
          return k > fields.size() || bool(parse_number(fields[k - 1]));
        });
  }
  if (!first_is_data) m_header_line = m_line_no;

  m_targets.assign(fields.size(), Target{ignored, Unit{}});
  for (const auto& [qname, spec] : m_options.columns) {
    const std::size_t q = quantity_index(qname);
    std::size_t column = 0;
    if (is_column_number(spec.source)) {
      column = column_number(spec.source);
      if (column > fields.size())
        throw InputError(ErrorKind::missing_column, at(m_line_no, column, qname),
                         "the column map reads " + qname + " from column " + spec.source +
                             ", but this line has only " + std::to_string(fields.size()) +
                             " columns");
    } else {
      for (std::size_t i = 0; i < fields.size(); ++i)
        if (fields[i] == spec.source) {
          column = i + 1;
          break;
        }
      if (column == 0)
        throw InputError(ErrorKind::missing_column, at(m_line_no, 0, qname),
                         "the column map reads " + qname + " from a column named '" + spec.source +
                             "', but the header line has no such column");
    }
    Target& target = m_targets[column - 1];
    if (target.slot != ignored)
      throw UsageError("column map: " + m_slots[target.slot].name + " and " + qname +
                       " both read column " + std::to_string(column) + " of " + m_source);
    std::string why;
    const auto unit = parse_unit(spec.unit, q, why);
    if (!unit) throw UsageError("column map item " + qname + ": " + why);
    target.unit = *unit;
    target.scaled = unit->log10 || unit->factor != 1.0;
    target.slot = m_slots.size();
    Slot slot;
    slot.quantity = q;
    slot.column = column;
    slot.name = first_is_data ? qname : std::string(fields[column - 1]);
    m_slots.push_back(std::move(slot));
  }
}

/// End of the field that starts at p (the next blank, comma or '#', or the end).
const char* field_end(const char* p, const char* end) {
  while (p < end && !is_blank_char(*p) && *p != '#') ++p;
  return p;
}

const char* TableReader::store(const Target& target, std::size_t column, const char* begin,
                               const char* line_end, double& out) {
  // Fast path: a plain decimal number that ends the field, converted in the same pass;
  // anything else goes to parse_number (std::from_chars, the error messages).
  const Scanned scanned = scan_number(begin, line_end);
  const char* stop = scanned.stop;
  double v = scanned.value;
  if (stop == nullptr || (stop != line_end && !is_blank_char(*stop) && *stop != '#')) {
    stop = field_end(begin, line_end);
    const std::string_view field(begin, static_cast<std::size_t>(stop - begin));
    const auto value = parse_number(field);
    Slot& slot = m_slots[target.slot];
    if (!value)
      throw InputError(ErrorKind::bad_number, at(m_line_no, column, slot.name),
                       "expected a number, found '" + std::string(field.substr(0, 40)) +
                           (field.size() > 40 ? "...'" : "'"));
    if (!std::isfinite(*value))
      throw InputError(ErrorKind::not_finite, at(m_line_no, column, slot.name),
                       "expected a finite number, found '" + std::string(field.substr(0, 40)) +
                           "'");
    v = *value;
  }
  if (target.scaled) {
    if (target.unit.log10) v = std::pow(10.0, v);
    v *= target.unit.factor;
    if (!std::isfinite(v)) {
      const std::string_view field(begin,
                                   static_cast<std::size_t>(field_end(begin, line_end) - begin));
      throw InputError(ErrorKind::not_finite, at(m_line_no, column, m_slots[target.slot].name),
                       "'" + std::string(field.substr(0, 40)) +
                           "' overflows a double after unit conversion");
    }
  }
  out = v;
  return stop;
}

void TableReader::grow(std::string_view line) {
  // First: room for as many rows as fit the rest of the text at this row's length; later
  // (shorter rows) twice as many.
  const std::size_t rest = m_text.size() - std::min(m_pos, m_text.size());
  const std::size_t rows = std::max(m_rows + rest / (line.size() + 1) + 1, 2 * m_capacity);
  m_out.resize(m_slots.size());
  for (std::size_t i = 0; i < m_slots.size(); ++i) {
    m_slots[i].values.resize(rows);
    m_out[i] = m_slots[i].values.data();
  }
  m_lines.resize(rows);
  m_capacity = rows;
}

void TableReader::read_row(std::string_view line) {
  if (m_rows == m_capacity) grow(line);
  const char* p = line.data();
  const char* const end = p + line.size();
  const std::size_t n_targets = m_targets.size();
  double* const* const out = m_out.data();
  const std::size_t row = m_rows;
  std::size_t column = 0;
  while (true) {
    while (p < end && is_blank_char(*p)) ++p;
    if (p == end || *p == '#') break;
    if (++column > n_targets) break;
    const Target& target = m_targets[column - 1];
    if (target.slot == ignored) {
      p = field_end(p, end);
      continue;
    }
    p = store(target, column, p, end, out[target.slot][row]);
  }
  if (column != n_targets) {
    // Count the remaining fields for the message.
    if (column > n_targets) {
      FieldCursor cur(std::string_view(p, static_cast<std::size_t>(end - p)));
      std::string_view field;
      cur.next(field); // the field counted above
      while (cur.next(field)) ++column;
    }
    const std::string ref = m_header_line != 0
                                ? "the header (line " + std::to_string(m_header_line) + ")"
                                : "the first row";
    throw InputError(ErrorKind::bad_format, at(m_line_no),
                     "expected " + std::to_string(n_targets) + " fields as in " + ref + ", found " +
                         std::to_string(column));
  }
  m_lines[m_rows] = m_line_no;
  ++m_rows;
}

const char* TableReader::read_plain_row(const char* p) {
  if (m_rows == m_capacity) return nullptr;
  // Bounded by the end of the text rather than the line: the line end '\n' is neither a
  // blank nor part of a number, so no field reaches past it. This saves finding the line end
  // first (memchr) and classifying the line.
  const char* const end = m_text.data() + m_text.size();
  const std::size_t n_targets = m_targets.size();
  const Target* const targets = m_targets.data();
  double* const* const out = m_out.data();
  const std::size_t row = m_rows;
  for (std::size_t column = 0; column < n_targets; ++column) {
    while (p != end && is_blank_char(*p)) ++p;
    const Scanned scanned = scan_number(p, end);
    if (scanned.stop == nullptr ||
        (scanned.stop != end && !is_blank_char(*scanned.stop) && *scanned.stop != '\n'))
      return nullptr;
    out[targets[column].slot][row] = scanned.value;
    p = scanned.stop;
  }
  while (p != end && is_blank_char(*p)) ++p;
  if (p == end) return p;
  return *p == '\n' ? p + 1 : nullptr;
}

StellarModel TableReader::read() {
  const bool mapped = !m_options.columns.empty();
  if (mapped) m_options.validate();

  std::string_view line;
  for (std::size_t i = 0; i < m_options.skip_lines; ++i)
    if (!next_line(line)) break;

  bool set_up = false;
  const char* const text = m_text.data();
  while (true) {
    if (m_plain_targets && m_pos < m_text.size()) {
      if (const char* next = read_plain_row(text + m_pos)) {
        ++m_line_no;
        m_lines[m_rows] = m_line_no;
        ++m_rows;
        m_pos = static_cast<std::size_t>(next - text);
        continue;
      }
    }
    if (!next_line(line)) break;
    switch (classify(line)) {
    case LineType::blank:
      continue;
    case LineType::comment:
      if (auto kv = metadata_of(line)) {
        if (kv->second.find('\r') != std::string::npos)
          throw InputError(ErrorKind::bad_format, at(m_line_no),
                           "metadata value of '" + kv->first +
                               "' holds a carriage return; expected one line of text");
        m_metadata.push_back(std::move(*kv));
      }
      continue;
    case LineType::content:
      break;
    }
    if (!set_up) {
      set_up = true;
      bool first_is_data = false;
      if (mapped)
        set_up_mapped(line, first_is_data);
      else
        set_up_native(line);
      m_plain_targets = std::all_of(m_targets.begin(), m_targets.end(), [](const Target& t) {
        return t.slot != ignored && !t.scaled;
      });
      if (!first_is_data) continue;
    }
    read_row(line);
  }
  if (!set_up)
    throw InputError(ErrorKind::missing_column, at(0),
                     mapped ? "no table rows found"
                            : "no header line found (expected column names r m P rho Gamma1)");
  return assemble();
}

StellarModel TableReader::assemble() {
  for (auto& s : m_slots) s.values.resize(m_rows);
  m_lines.resize(m_rows);
  StellarModel model;
  model.source = m_source;
  model.metadata = std::move(m_metadata);
  model.line = std::move(m_lines);
  std::size_t column_of[n_quantities] = {};
  std::string name_of[n_quantities];
  for (auto& s : m_slots) {
    if (s.quantity == not_a_quantity) {
      model.extra.emplace_back(s.name, std::move(s.values));
    } else {
      model.*(quantities[s.quantity].member) = std::move(s.values);
      column_of[s.quantity] = s.column;
      name_of[s.quantity] = s.name;
    }
  }
  // Surface-first tables become centre-first (line numbers travel with their points).
  if (model.r.size() >= 2 && model.r.front() > model.r.back()) {
    for (const auto& q : quantities)
      std::reverse((model.*q.member).begin(), (model.*q.member).end());
    for (auto& e : model.extra) std::reverse(e.second.begin(), e.second.end());
    std::reverse(model.line.begin(), model.line.end());
  }
  try {
    validate_model(model);
  } catch (const InputError& e) {
    // Add the column number and header name of the offending quantity.
    const std::size_t q = quantity_index(e.where().column_name);
    if (q == not_a_quantity || column_of[q] == 0) throw;
    const std::string text = std::string(e.what()).substr(e.where().prefix().size());
    Location loc = e.where();
    loc.column = column_of[q];
    loc.column_name = name_of[q];
    throw InputError(e.kind(), loc, text);
  }
  return model;
}

} // namespace

// --- Public functions ---------------------------------------------------------------------

std::optional<double> parse_number(std::string_view token) noexcept {
  if (token.empty()) return std::nullopt;
  {
    const Scanned scanned = scan_number(token.data(), token.data() + token.size());
    if (scanned.stop == token.data() + token.size()) return scanned.value;
  }
  if (token[0] == '+') {
    token.remove_prefix(1);
    if (token.empty() || token[0] == '-' || token[0] == '+') return std::nullopt;
  }
  const char* first = token.data();
  const char* last = first + token.size();
  double value = 0.0;
  auto res = std::from_chars(first, last, value);
  if (res.ec == std::errc() && res.ptr == last) return value;
  if (res.ec == std::errc::invalid_argument) return std::nullopt;

  // Fortran exponent (1.0D+05) or a value out of the double range: retry on a copy.
  const bool fortran = res.ptr != last && (*res.ptr == 'D' || *res.ptr == 'd');
  if (res.ec == std::errc() && !fortran) return std::nullopt; // trailing junk
  char small[64];
  std::unique_ptr<char[]> big;
  char* buf = small;
  if (token.size() + 1 > sizeof small) {
    big.reset(new (std::nothrow) char[token.size() + 1]);
    if (!big) return std::nullopt;
    buf = big.get();
  }
  std::memcpy(buf, first, token.size());
  buf[token.size()] = '\0';
  if (fortran) buf[res.ptr - first] = 'e';
  const char* bend = buf + token.size();
  res = std::from_chars(buf, bend, value);
  if (res.ptr != bend || res.ec == std::errc::invalid_argument) return std::nullopt;
  if (res.ec == std::errc::result_out_of_range) {
    // strtod gives +-HUGE_VAL on overflow and 0 or a subnormal on underflow.
    char* end = nullptr;
    value = std::strtod(buf, &end);
    if (end != bend) return std::nullopt;
  }
  return value;
}

void ReadOptions::validate() const {
  bool seen[n_quantities] = {};
  for (const auto& [qname, spec] : columns) {
    const std::size_t q = quantity_index(qname);
    if (q == not_a_quantity)
      throw UsageError("column map: unknown quantity '" + qname + "'; expected one of " +
                       quantity_list());
    if (seen[q]) throw UsageError("column map: quantity " + qname + " mapped twice");
    seen[q] = true;
    if (trim(spec.source).empty())
      throw UsageError("column map item " + qname + ": no column given");
    if (is_column_number(spec.source) && column_number(spec.source) == 0)
      throw UsageError("column map item " + qname + ": column numbers start at 1");
    std::string why;
    if (!parse_unit(spec.unit, q, why)) throw UsageError("column map item " + qname + ": " + why);
  }
  if (columns.empty()) return;
  std::string missing;
  for (std::size_t q = 0; q < n_quantities; ++q)
    if (quantities[q].required && !seen[q])
      missing += (missing.empty() ? "" : ", ") + std::string(quantities[q].name);
  if (!missing.empty())
    throw UsageError("column map: required quantities not mapped: " + missing +
                     " (required: r m P rho Gamma1)");
}

ReadOptions parse_column_map(const std::string& spec) {
  ReadOptions options;
  if (trim(spec).empty()) return options;
  std::string_view rest = spec;
  while (true) {
    const auto comma = rest.find(',');
    const std::string_view raw = rest.substr(0, comma);
    const std::string_view item = trim(raw);
    const auto eq = item.find('=');
    if (item.empty() || eq == std::string_view::npos || eq == 0 || eq + 1 == item.size())
      throw UsageError("column map item '" + std::string(item) +
                       "': expected QUANTITY=COLUMN[:UNIT], e.g. r=2:Rsun or P=pressure");
    ColumnSpec col;
    std::string_view source = trim(item.substr(eq + 1));
    const auto colon = source.find(':');
    if (colon != std::string_view::npos) {
      col.unit = std::string(trim(source.substr(colon + 1)));
      source = trim(source.substr(0, colon));
      if (col.unit.empty())
        throw UsageError("column map item '" + std::string(item) + "': empty unit after ':'");
    }
    col.source = std::string(source);
    options.columns.emplace_back(std::string(trim(item.substr(0, eq))), std::move(col));
    if (comma == std::string_view::npos) break;
    rest.remove_prefix(comma + 1);
  }
  options.validate();
  return options;
}

StellarModel parse_model(std::string_view text, const std::string& source_name,
                         const ReadOptions& options) {
  return TableReader(text, source_name, options).read();
}

StellarModel read_model(const std::string& path, const ReadOptions& options) {
  Location loc;
  loc.file = path;
  const auto failure = [&loc](const char* what) {
    return InputError(ErrorKind::io, loc, std::string(what) + std::strerror(errno));
  };
  int fd = -1;
  do
    fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  while (fd < 0 && errno == EINTR);
  if (fd < 0) throw failure("cannot open: ");
  const std::unique_ptr<int, void (*)(int*)> guard(&fd, [](int* f) { ::close(*f); });
  struct stat st {};
  if (::fstat(fd, &st) != 0) throw failure("cannot read: ");
  if (S_ISDIR(st.st_mode)) throw InputError(ErrorKind::io, loc, "cannot read: is a directory");
  // The text goes straight into one buffer sized from fstat (one byte more, so that the read
  // which finds the end need not grow it); it grows when the file is longer than that (it
  // grew meanwhile, or is no regular file). Not zero-filled; no mmap (a file truncated while
  // mapped would end the program with SIGBUS).
  std::size_t capacity = S_ISREG(st.st_mode) && st.st_size > 0
                             ? static_cast<std::size_t>(st.st_size) + 1
                             : std::size_t{1} << 16;
  std::unique_ptr<char[]> text(new char[capacity]);
  std::size_t size = 0;
  while (true) {
    if (size == capacity) {
      std::unique_ptr<char[]> larger(new char[2 * capacity]);
      std::memcpy(larger.get(), text.get(), size);
      text = std::move(larger);
      capacity *= 2;
    }
    const ssize_t n = ::read(fd, text.get() + size, capacity - size);
    if (n == 0) break;
    if (n < 0) {
      if (errno == EINTR) continue;
      throw failure("cannot read: ");
    }
    size += static_cast<std::size_t>(n);
  }
  return parse_model(std::string_view(text.get(), size), path, options);
}

} // namespace radmode
