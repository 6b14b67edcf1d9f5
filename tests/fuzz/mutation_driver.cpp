// Stand-in for libFuzzer when the compiler is not clang: feeds the seed corpus and seeded
// random mutations of it to LLVMFuzzerTestOneInput for a bounded time. Understands the
// libFuzzer arguments tests/fuzz/run passes (-max_total_time=N, -seed=N, directories; other
// -flag=value arguments are ignored). Findings abort the process (sanitizers, std::terminate).
#include <chrono>
#include <cstddef>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <random>
#include <string>
#include <vector>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size);

namespace {

using Bytes = std::vector<std::uint8_t>;

void run_one(const Bytes& input) {
  LLVMFuzzerTestOneInput(input.data(), input.size());
}

/// One random edit: flip, insert, delete, duplicate a range, or splice in a token that the
/// reader treats specially.
void mutate(Bytes& b, std::mt19937_64& rng, const std::vector<Bytes>& corpus) {
  static const char* const tokens[] = {
      "\n", "#",    " = ",    ",", "[Rsun]", "[log10]", "nan", "inf",           "1e999",  "-1",
      "0",  "D+05", "Gamma1", "r", "\r\n",   "e",       "+",   "[log10(Lsun)]", "1e-400", "  "};
  auto pick = [&](std::size_t n) { return n == 0 ? std::size_t{0} : std::size_t(rng() % n); };
  switch (rng() % 6) {
  case 0:
    if (!b.empty()) b[pick(b.size())] ^= std::uint8_t(1u << (rng() % 8));
    break;
  case 1:
    b.insert(b.begin() + std::ptrdiff_t(pick(b.size() + 1)), std::uint8_t(rng()));
    break;
  case 2:
    if (!b.empty()) {
      const std::size_t at = pick(b.size());
      const std::size_t len = 1 + pick(std::min<std::size_t>(32, b.size() - at));
      b.erase(b.begin() + std::ptrdiff_t(at),
              b.begin() + std::ptrdiff_t(std::min(b.size(), at + len)));
    }
    break;
  case 3: {
    const char* t = tokens[pick(std::size(tokens))];
    b.insert(b.begin() + std::ptrdiff_t(pick(b.size() + 1)), t,
             t + std::char_traits<char>::length(t));
    break;
  }
  case 4:
    if (!b.empty() && b.size() < 65536) {
      const std::size_t at = pick(b.size());
      const std::size_t len = 1 + pick(std::min<std::size_t>(256, b.size() - at));
      Bytes piece(b.begin() + std::ptrdiff_t(at), b.begin() + std::ptrdiff_t(at + len));
      b.insert(b.begin() + std::ptrdiff_t(pick(b.size() + 1)), piece.begin(), piece.end());
    }
    break;
  default:
    if (!corpus.empty()) {
      const Bytes& other = corpus[pick(corpus.size())];
      if (!other.empty()) {
        const std::size_t at = pick(other.size());
        b.insert(b.begin() + std::ptrdiff_t(pick(b.size() + 1)), other.begin() + std::ptrdiff_t(at),
                 other.end());
      }
    }
  }
}

} // namespace

int main(int argc, char** argv) {
  double seconds = 10.0;
  std::uint64_t seed = 12345;
  std::vector<Bytes> corpus;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg.rfind("-max_total_time=", 0) == 0) {
      seconds = std::atof(arg.c_str() + 16);
    } else if (arg.rfind("-seed=", 0) == 0) {
      seed = std::strtoull(arg.c_str() + 6, nullptr, 10);
    } else if (!arg.empty() && arg[0] == '-') {
      continue; // other libFuzzer options: not used here
    } else {
      std::error_code ec;
      for (const auto& entry : std::filesystem::directory_iterator(arg, ec)) {
        if (!entry.is_regular_file()) continue;
        std::ifstream in(entry.path(), std::ios::binary);
        corpus.emplace_back(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
      }
    }
  }
  for (const auto& input : corpus) run_one(input);
  if (corpus.empty()) corpus.emplace_back();

  std::mt19937_64 rng(seed);
  const auto stop = std::chrono::steady_clock::now() + std::chrono::duration<double>(seconds);
  unsigned long runs = 0;
  while (std::chrono::steady_clock::now() < stop) {
    Bytes input = corpus[rng() % corpus.size()];
    const unsigned edits = 1 + unsigned(rng() % 8);
    for (unsigned e = 0; e < edits; ++e) mutate(input, rng, corpus);
    run_one(input);
    ++runs;
  }
  std::printf("mutation driver: %lu runs in %.0f s, seed %llu, no finding\n", runs, seconds,
              static_cast<unsigned long long>(seed));
  return 0;
}
