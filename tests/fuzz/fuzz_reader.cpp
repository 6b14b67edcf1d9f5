// Fuzz target for the table reader. Any radmode::Error is an accepted outcome; a crash,
// undefined behaviour, a leak, another exception (std::terminate), a returned model that
// breaks StellarModel's invariants, or one that does not survive format_model + parse_model
// unchanged is a finding.
#include "radmode/error.hpp"
#include "radmode/model_io.hpp"

#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>

namespace {

void check_invariants(const radmode::StellarModel& model) {
  // A model the reader returns must pass the full check again and be consistent.
  try {
    radmode::validate_model(model);
  } catch (const radmode::Error&) {
    std::abort();
  }
  if (model.line.size() != model.size()) std::abort();
  for (const auto& e : model.extra)
    if (e.second.size() != model.size()) std::abort();

  // Round trip through the writer: every model the reader accepts can be written, and reads
  // back identical (values bit for bit up to the sign of zero, metadata, extra columns).
  radmode::StellarModel back;
  try {
    back = radmode::parse_model(radmode::format_model(model), "round-trip");
  } catch (const radmode::Error&) {
    std::abort();
  }
  if (back.r != model.r || back.m != model.m || back.P != model.P || back.rho != model.rho ||
      back.gamma1 != model.gamma1 || back.T != model.T || back.L != model.L ||
      back.nabla_ad != model.nabla_ad || back.u != model.u || back.extra != model.extra ||
      back.metadata != model.metadata)
    std::abort();
}

void try_parse(std::string_view text, const radmode::ReadOptions& options) {
  try {
    check_invariants(radmode::parse_model(text, "fuzz-input", options));
  } catch (const radmode::Error&) {
  }
}

} // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);

  // 1. Native format.
  try_parse(text, {});

  // 2. Fixed column maps, by number and by name, with a skip taken from the input.
  radmode::ReadOptions by_number =
      radmode::parse_column_map("r=1:Rsun,m=2:Msun,P=3:log10,rho=4,Gamma1=5,L=6:log10(Lsun)");
  by_number.skip_lines = size > 0 ? data[0] % 3 : 0;
  try_parse(text, by_number);
  try_parse(text, radmode::parse_column_map("r=r,m=m:g,P=P,rho=rho:cgs,Gamma1=Gamma1,T=T"));

  // 3. The first line as a column map spec, the rest as the table.
  const std::size_t nl = text.find('\n');
  if (nl != std::string_view::npos) {
    try {
      const auto options = radmode::parse_column_map(std::string(text.substr(0, nl)));
      try_parse(text.substr(nl + 1), options);
    } catch (const radmode::Error&) {
    }
  }

  // 4. Number parsing on its own.
  (void)radmode::parse_number(text.substr(0, 64));
  return 0;
}
