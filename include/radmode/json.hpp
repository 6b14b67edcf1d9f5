#pragma once
// Minimal streaming JSON writer for radmode's reports (no dependency needed for output only).
// Numbers are written with 17 significant digits (round-trip); a non-finite number is written
// as null, so no report ever contains NaN. Usage:
//   JsonWriter j(out);
//   j.begin_object(); j.key("mass_g").value(1.989e33); j.key("zones").begin_array(); ...
//   j.end_array(); j.end_object();
#include <ostream>
#include <string>
#include <string_view>
#include <vector>

namespace radmode {

class JsonWriter {
public:
  explicit JsonWriter(std::ostream& out, int indent = 2) : m_out(out), m_indent(indent) {}

  JsonWriter& begin_object();
  JsonWriter& end_object();
  JsonWriter& begin_array();
  JsonWriter& end_array();
  JsonWriter& key(std::string_view name);
  JsonWriter& value(double x);
  JsonWriter& value(int x);
  JsonWriter& value(long x);
  JsonWriter& value(long long x);
  JsonWriter& value(unsigned long x);
  JsonWriter& value(unsigned long long x);
  JsonWriter& value(unsigned x);
  JsonWriter& value(bool b);
  JsonWriter& value(std::string_view s);
  JsonWriter& value(const char* s) { return value(std::string_view(s)); }
  JsonWriter& value(const std::string& s) { return value(std::string_view(s)); }
  JsonWriter& null();
  /// key + value in one call.
  template <class T> JsonWriter& field(std::string_view name, const T& v) { return key(name).value(v); }
  /// Array of numbers on one line.
  JsonWriter& value(const std::vector<double>& xs);

  /// JSON string literal with escapes, quotes included.
  static std::string quote(std::string_view s);
  /// Shortest text that reads back to the same double; "null" for NaN/inf.
  static std::string number(double x);

private:
  void before_value();
  void newline();
  std::ostream& m_out;
  int m_indent;
  struct Level {
    bool is_object;
    bool empty;
  };
  std::vector<Level> m_stack;
  bool m_after_key = false;
};

} // namespace radmode
