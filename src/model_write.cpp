#include "radmode/error.hpp"
#include "radmode/model_io.hpp"
#include "radmode/output.hpp"

#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

namespace radmode {

namespace {

void check_metadata(const std::string& key, const std::string& value) {
  const bool bad_key = key.empty() || key.find_first_of(" \t\r\n=#") != std::string::npos;
  if (bad_key)
    throw Error(ErrorKind::bad_format,
                "metadata key '" + key + "' cannot be written: expected a non-empty name "
                "without spaces, '=' or '#'");
  if (value.find_first_of("\r\n") != std::string::npos)
    throw Error(ErrorKind::bad_format,
                "metadata value of '" + key + "' cannot be written: it spans several lines");
}

void append_number(std::string& out, double x) {
  char buf[32];
  const int len = std::snprintf(buf, sizeof buf, "%.17g", x);
  out.append(buf, static_cast<std::size_t>(len));
}

} // namespace

std::string format_model(const StellarModel& model) {
  validate_model(model);
  struct Column {
    std::string name;
    const std::vector<double>* values;
  };
  std::vector<Column> cols = {{"r", &model.r},
                              {"m", &model.m},
                              {"P", &model.P},
                              {"rho", &model.rho},
                              {"Gamma1", &model.gamma1}};
  if (!model.T.empty()) cols.push_back({"T", &model.T});
  if (!model.L.empty()) cols.push_back({"L", &model.L});
  if (!model.nabla_ad.empty()) cols.push_back({"nabla_ad", &model.nabla_ad});
  if (!model.u.empty()) cols.push_back({"u", &model.u});
  for (const auto& [name, values] : model.extra) {
    if (name.empty() || name.find_first_of(" \t\r\n#,") != std::string::npos)
      throw Error(ErrorKind::bad_format, "extra column name '" + name +
                                             "' cannot be written: expected a name without "
                                             "spaces, commas or '#'");
    if (values.size() != model.size())
      throw Error(ErrorKind::bad_format,
                  "extra column '" + name + "' has " + std::to_string(values.size()) +
                      " values; the model has " + std::to_string(model.size()) + " points");
    cols.push_back({name, &values});
  }

  std::string out = "# radmode model table\n";
  for (const auto& [key, value] : model.metadata) {
    check_metadata(key, value);
    out += "# " + key + " = " + value + "\n";
  }
  for (std::size_t c = 0; c < cols.size(); ++c) out += (c ? " " : "") + cols[c].name;
  out += '\n';
  out.reserve(out.size() + model.size() * cols.size() * 25);
  for (std::size_t i = 0; i < model.size(); ++i) {
    for (std::size_t c = 0; c < cols.size(); ++c) {
      const double x = (*cols[c].values)[i];
      if (!std::isfinite(x))
        throw Error(ErrorKind::not_finite, "column " + cols[c].name + ", point " +
                                               std::to_string(i + 1) +
                                               ": non-finite value cannot be written");
      if (c) out += ' ';
      append_number(out, x);
    }
    out += '\n';
  }
  return out;
}

void write_model(const StellarModel& model, const std::string& path) {
  write_text_file_atomic(path, format_model(model));
}

} // namespace radmode
