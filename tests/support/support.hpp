#pragma once
// Small helpers shared by the unit tests.
#include <cstdint>
#include <cstring>
#include <string>

namespace radmode::test {

/// The 64 bits of a double (sign, exponent and significand), for bit-for-bit comparisons.
inline std::uint64_t bits_of(double x) {
  std::uint64_t b = 0;
  std::memcpy(&b, &x, sizeof b);
  return b;
}

/// A fresh, empty directory under the system temp dir, removed (with contents) on destruction.
class TempDir {
public:
  TempDir();
  ~TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  const std::string& path() const { return m_path; }
  /// path()/name
  std::string file(const std::string& name) const { return m_path + "/" + name; }

private:
  std::string m_path;
};

/// Writes text to a file (throws std::runtime_error on failure).
void write_text(const std::string& path, const std::string& text);
/// Whole file as a string (throws std::runtime_error on failure).
std::string read_text(const std::string& path);
/// Path of a file in the source tree, e.g. source_path("models/x.txt").
std::string source_path(const std::string& relative);

} // namespace radmode::test
