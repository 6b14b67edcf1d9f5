#include "radmode/model.hpp"

#include "radmode/error.hpp"

#include <cmath>
#include <limits>

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

/// The row checks of validate_model in one pass without branches (comparisons combined with
/// `&`, so that the loop vectorizes): true when every check passes. Any NaN fails a
/// comparison, an infinity fails `<= max`. Called after the length checks (every column has
/// r's length, at least StellarModel::min_points).
bool rows_look_valid(const StellarModel& model) {
  const std::size_t n = model.r.size();
  const double* r = model.r.data();
  const double* m = model.m.data();
  const double* P = model.P.data();
  const double* rho = model.rho.data();
  const double* g1 = model.gamma1.data();
  constexpr double big = std::numeric_limits<double>::max();
  // First and last rows: the special cases (r_0 >= 0; rho = 0 with P = 0 at the surface).
  const std::size_t last = n - 1;
  bool ok = r[0] >= 0.0 && r[0] <= big && m[0] >= 0.0 && m[0] <= big && P[0] >= 0.0 &&
            P[0] <= big && rho[0] > 0.0 && rho[0] <= big && g1[0] > 0.0 && g1[0] <= big &&
            P[last] >= 0.0 && P[last] <= big && g1[last] > 0.0 && g1[last] <= big &&
            (rho[last] > 0.0 || (rho[last] == 0.0 && P[last] == 0.0)) && rho[last] <= big &&
            r[last] > r[0] && r[last] <= big && m[last] > 0.0 && m[last] <= big &&
            r[1] >= r[0] && m[1] >= m[0];
  if (!ok) return false;
  // Rows 1 .. last: monotone r and m (which also makes them finite: r_0 and r_last are),
  // no radius three times; rows 1 .. last - 1: P >= 0, rho > 0, Gamma1 > 0, all finite.
  // (Failures counted in a double: the form of these loops that GCC vectorizes.)
  double bad = 0.0;
  for (std::size_t i = 2; i < n; ++i) {
    const bool ok_row = (r[i] >= r[i - 1]) & (m[i] >= m[i - 1]) &
                        ((r[i] != r[i - 1]) | (r[i - 1] != r[i - 2]));
    bad += ok_row ? 0.0 : 1.0;
  }
  for (std::size_t i = 1; i < last; ++i) {
    const bool ok_row = (P[i] >= 0.0) & (P[i] <= big) & (rho[i] > 0.0) & (rho[i] <= big) &
                        (g1[i] > 0.0) & (g1[i] <= big);
    bad += ok_row ? 0.0 : 1.0;
  }
  for (const auto* opt : {&model.T, &model.L, &model.nabla_ad, &model.u})
    for (const double v : *opt) bad += v >= -big && v <= big ? 0.0 : 1.0;
  return bad == 0.0;
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

  if (rows_look_valid(model)) return;
  // Something is wrong: find the first offending point and say what (in a fixed order of
  // checks, so that the message does not depend on how the quick check above is written).
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
