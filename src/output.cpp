#include "radmode/output.hpp"

#include "radmode/error.hpp"

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <iostream>
#include <random>

namespace radmode {

void write_text_file_atomic(const std::string& path, const std::string& text) {
  if (path == "-") {
    std::cout << text;
    std::cout.flush();
    if (!std::cout) throw Error(ErrorKind::io, "cannot write to standard output");
    return;
  }
  if (path.empty()) throw Error(ErrorKind::io, "empty output file name");
  std::random_device rd;
  const std::string tmp = path + ".tmp-" + std::to_string(rd() % 1000000u);
  {
    std::ofstream out(tmp, std::ios::binary | std::ios::trunc);
    if (!out)
      throw Error(ErrorKind::io, path + ": cannot open for writing: " + std::strerror(errno));
    out << text;
    out.flush();
    if (!out) {
      out.close();
      std::remove(tmp.c_str());
      throw Error(ErrorKind::io, path + ": write failed: " + std::strerror(errno));
    }
  }
  if (std::rename(tmp.c_str(), path.c_str()) != 0) {
    const std::string reason = std::strerror(errno);
    std::remove(tmp.c_str());
    throw Error(ErrorKind::io, path + ": cannot rename the finished file into place: " + reason);
  }
}

} // namespace radmode
