#include "radmode/json.hpp"

#include <charconv>
#include <cmath>
#include <cstdio>
#include <stdexcept>

namespace radmode {

std::string JsonWriter::quote(std::string_view s) {
  std::string out;
  out.reserve(s.size() + 2);
  out += '"';
  for (char ch : s) {
    const auto c = static_cast<unsigned char>(ch);
    switch (c) {
    case '"': out += "\\\""; break;
    case '\\': out += "\\\\"; break;
    case '\n': out += "\\n"; break;
    case '\r': out += "\\r"; break;
    case '\t': out += "\\t"; break;
    case '\b': out += "\\b"; break;
    case '\f': out += "\\f"; break;
    default:
      if (c < 0x20) {
        char buf[8];
        std::snprintf(buf, sizeof buf, "\\u%04x", static_cast<unsigned>(c));
        out += buf;
      } else {
        out += ch;
      }
    }
  }
  out += '"';
  return out;
}

std::string JsonWriter::number(double x) {
  if (!std::isfinite(x)) return "null";
  // The first of %.15g, %.16g and %.17g that reads back as x (%.17g always does).
  // std::to_chars with chars_format::general and a precision writes what printf's %.*g
  // writes (C++17 [charconv.to.chars]; compared with snprintf in tests/test_json.cpp), and
  // std::from_chars reads like strtod in the "C" locale, both several times faster.
  char buf[32];
  char* end = buf;
  for (int prec = 15; prec <= 17; ++prec) {
    end = std::to_chars(buf, buf + sizeof buf, x, std::chars_format::general, prec).ptr;
    double back = 0.0;
    std::from_chars(buf, end, back);
    if (back == x) break;
  }
  return std::string(buf, end);
}

void JsonWriter::newline() {
  if (m_indent <= 0) return;
  m_out << '\n';
  for (std::size_t i = 0; i < m_stack.size() * static_cast<std::size_t>(m_indent); ++i) m_out << ' ';
}

void JsonWriter::before_value() {
  if (m_after_key) {
    m_after_key = false;
    return;
  }
  if (!m_stack.empty()) {
    if (m_stack.back().is_object) throw std::logic_error("JsonWriter: value without key in object");
    if (!m_stack.back().empty) m_out << ',';
    m_stack.back().empty = false;
    newline();
  }
}

JsonWriter& JsonWriter::key(std::string_view name) {
  if (m_stack.empty() || !m_stack.back().is_object)
    throw std::logic_error("JsonWriter: key outside an object");
  if (!m_stack.back().empty) m_out << ',';
  m_stack.back().empty = false;
  newline();
  m_out << quote(name) << (m_indent > 0 ? ": " : ":");
  m_after_key = true;
  return *this;
}

JsonWriter& JsonWriter::begin_object() {
  before_value();
  m_out << '{';
  m_stack.push_back({true, true});
  return *this;
}

JsonWriter& JsonWriter::end_object() {
  const bool empty = m_stack.back().empty;
  m_stack.pop_back();
  if (!empty) newline();
  m_out << '}';
  if (m_stack.empty() && m_indent > 0) m_out << '\n';
  return *this;
}

JsonWriter& JsonWriter::begin_array() {
  before_value();
  m_out << '[';
  m_stack.push_back({false, true});
  return *this;
}

JsonWriter& JsonWriter::end_array() {
  const bool empty = m_stack.back().empty;
  m_stack.pop_back();
  if (!empty) newline();
  m_out << ']';
  if (m_stack.empty() && m_indent > 0) m_out << '\n';
  return *this;
}

JsonWriter& JsonWriter::value(double x) {
  before_value();
  m_out << number(x);
  return *this;
}

JsonWriter& JsonWriter::value(int x) { before_value(); m_out << x; return *this; }
JsonWriter& JsonWriter::value(long x) { before_value(); m_out << x; return *this; }
JsonWriter& JsonWriter::value(long long x) { before_value(); m_out << x; return *this; }
JsonWriter& JsonWriter::value(unsigned x) { before_value(); m_out << x; return *this; }
JsonWriter& JsonWriter::value(unsigned long x) { before_value(); m_out << x; return *this; }
JsonWriter& JsonWriter::value(unsigned long long x) { before_value(); m_out << x; return *this; }

JsonWriter& JsonWriter::value(bool b) {
  before_value();
  m_out << (b ? "true" : "false");
  return *this;
}

JsonWriter& JsonWriter::value(std::string_view s) {
  before_value();
  m_out << quote(s);
  return *this;
}

JsonWriter& JsonWriter::null() {
  before_value();
  m_out << "null";
  return *this;
}

JsonWriter& JsonWriter::value(const std::vector<double>& xs) {
  before_value();
  m_out << '[';
  for (std::size_t i = 0; i < xs.size(); ++i) m_out << (i ? ", " : "") << number(xs[i]);
  m_out << ']';
  return *this;
}

} // namespace radmode
