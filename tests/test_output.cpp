// Atomic result-file writing: complete content or nothing under the final name.
#include "radmode/output.hpp"

#include "radmode/error.hpp"
#include "support.hpp"

#include <doctest/doctest.h>

#include <filesystem>

using namespace radmode;

TEST_CASE("writes the whole text and leaves no temporary file") {
  test::TempDir dir;
  const auto path = dir.file("table.csv");
  write_text_file_atomic(path, "a,b\n1,2\n");
  CHECK(test::read_text(path) == "a,b\n1,2\n");
  std::size_t files = 0;
  for (const auto& e : std::filesystem::directory_iterator(dir.path())) { (void)e; ++files; }
  CHECK(files == 1);
}

TEST_CASE("unwritable path throws an io error naming the path") {
  test::TempDir dir;
  const auto path = dir.file("no/such/dir/out.txt");
  try {
    write_text_file_atomic(path, "x");
    FAIL("expected an exception");
  } catch (const Error& e) {
    CHECK(e.kind() == ErrorKind::io);
    CHECK(std::string(e.what()).find(path) != std::string::npos);
  }
}
