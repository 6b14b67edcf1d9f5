#include "radmode/model.hpp"

#include "radmode/error.hpp"

#include <cmath>

namespace radmode {

std::string StellarModel::meta(const std::string& key) const {
  for (const auto& kv : metadata)
    if (kv.first == key) return kv.second;
  return {};
}

namespace {

Location where(const StellarModel& model, std::size_t i, const char* column) {
  Location loc;
  loc.file = model.source;
  loc.line = i < model.line.size() ? model.line[i] : 0;
  loc.column_name = column;
  return loc;
}

std::string point_text(const StellarModel& model, std::size_t i) {
  return i < model.line.size() ? std::string() : "point " + std::to_string(i + 1) + ": ";
}

} // namespace

void validate_model(const StellarModel& model) {
  const std::size_t n = model.r.size();
  Location file_loc;
  file_loc.file = model.source;
  if (model.m.size() != n || model.P.size() != n || model.rho.size() != n ||
      model.gamma1.size() != n)
    throw InputError(ErrorKind::bad_format, file_loc,
                     "required columns r, m, P, rho, Gamma1 have different lengths");
  for (const auto* opt : {&model.T, &model.L, &model.nabla_ad, &model.u})
    if (!opt->empty() && opt->size() != n)
      throw InputError(ErrorKind::bad_format, file_loc,
                       "an optional column has a different length from r");
  if (n < StellarModel::min_points)
    throw InputError(ErrorKind::too_few_points, file_loc,
                     "expected at least " + std::to_string(StellarModel::min_points) +
                         " points, found " + std::to_string(n));

  struct Col {
    const char* name;
    const std::vector<double>* v;
  };
  const Col cols[] = {{"r", &model.r},     {"m", &model.m},           {"P", &model.P},
                      {"rho", &model.rho}, {"Gamma1", &model.gamma1}, {"T", &model.T},
                      {"L", &model.L},     {"nabla_ad", &model.nabla_ad}, {"u", &model.u}};
  for (const auto& c : cols)
    for (std::size_t i = 0; i < c.v->size(); ++i)
      if (!std::isfinite((*c.v)[i]))
        throw InputError(ErrorKind::not_finite, where(model, i, c.name),
                         point_text(model, i) + "expected a finite number, found " +
                             std::to_string((*c.v)[i]));

  if (model.r[0] < 0.0)
    throw InputError(ErrorKind::not_monotonic, where(model, 0, "r"),
                     point_text(model, 0) + "expected r >= 0");
  for (std::size_t i = 0; i < n; ++i) {
    if (i > 0) {
      if (model.r[i] < model.r[i - 1])
        throw InputError(ErrorKind::not_monotonic, where(model, i, "r"),
                         point_text(model, i) + "radius decreases; expected r monotonic");
      if (i > 1 && model.r[i] == model.r[i - 1] && model.r[i - 1] == model.r[i - 2])
        throw InputError(ErrorKind::not_monotonic, where(model, i, "r"),
                         point_text(model, i) +
                             "radius repeated three times; a discontinuity takes two rows");
      if (model.m[i] < model.m[i - 1])
        throw InputError(ErrorKind::not_monotonic, where(model, i, "m"),
                         point_text(model, i) + "mass decreases; expected m monotonic in r");
    }
    if (model.m[i] < 0.0)
      throw InputError(ErrorKind::not_positive, where(model, i, "m"),
                       point_text(model, i) + "expected m >= 0");
    // rho = 0 is allowed only at a zero-pressure surface (last point, P = 0): the exact
    // surface of a polytrope of index n > 0.
    const bool zero_surface = i + 1 == n && model.P[i] == 0.0 && model.rho[i] == 0.0;
    if (!(model.rho[i] > 0.0) && !zero_surface)
      throw InputError(ErrorKind::not_positive, where(model, i, "rho"),
                       point_text(model, i) +
                           "expected rho > 0 (rho = 0 only at a surface point with P = 0)");
    if (!(model.gamma1[i] > 0.0))
      throw InputError(ErrorKind::not_positive, where(model, i, "Gamma1"),
                       point_text(model, i) + "expected Gamma1 > 0");
    if (model.P[i] < 0.0)
      throw InputError(ErrorKind::negative_pressure, where(model, i, "P"),
                       point_text(model, i) + "expected P >= 0");
  }
  if (!(model.r.back() > model.r.front()))
    throw InputError(ErrorKind::not_monotonic, where(model, n - 1, "r"),
                     "expected the surface radius to exceed the innermost radius");
  if (!(model.m.back() > 0.0))
    throw InputError(ErrorKind::not_positive, where(model, n - 1, "m"),
                     "expected a positive total mass");
}

} // namespace radmode
