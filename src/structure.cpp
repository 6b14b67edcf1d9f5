#include "radmode/structure.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"

#include <algorithm>
#include <cmath>
#include <sstream>

namespace radmode {

namespace {

void prepend(std::vector<double>& v, double x) {
  if (!v.empty()) v.insert(v.begin(), x);
}

} // namespace

Structure::Structure(const StellarModel& model, InnerCondition inner)
    : m_table(model), m_inner(inner) {
  validate_model(model);
  StellarModel& t = m_table;
  if (inner == InnerCondition::centre && t.r.front() > 0.0) {
    const double r0 = t.r.front(), rho0 = t.rho.front();
    const double Pc = t.P.front() + (2.0 * constants::pi / 3.0) * constants::G * rho0 * rho0 * r0 * r0;
    prepend(t.r, 0.0);
    prepend(t.m, 0.0);
    prepend(t.P, Pc);
    prepend(t.rho, rho0);
    prepend(t.gamma1, t.gamma1.front());
    prepend(t.nabla_ad, t.nabla_ad.empty() ? 0.0 : t.nabla_ad.front());
    // Other optional columns keep their length equal to r: repeat the innermost value.
    prepend(t.T, t.T.empty() ? 0.0 : t.T.front());
    prepend(t.L, 0.0);
    prepend(t.u, t.u.empty() ? 0.0 : t.u.front());
    for (auto& col : t.extra) prepend(col.second, col.second.empty() ? 0.0 : col.second.front());
    if (!t.line.empty()) t.line.insert(t.line.begin(), std::size_t{0});
    m_extended = true;
  }
  m_has_nabla_ad = !t.nabla_ad.empty();
  m_mass = t.m.back();
  m_surface_P = t.P.back();

  const std::size_t n = t.r.size();
  m_iv.reserve(n - 1);
  m_node_r.reserve(n);
  m_node_r.push_back(t.r.front());
  m_discontinuity.push_back(false);
  for (std::size_t j = 0; j + 1 < n; ++j) {
    if (t.r[j + 1] == t.r[j]) { // repeated radius: no interval, the node is a discontinuity
      m_discontinuity.back() = true;
      continue;
    }
    Interval iv{};
    iv.row = j;
    iv.r0 = t.r[j];
    iv.r1 = t.r[j + 1];
    iv.m0 = t.m[j];
    iv.m1 = t.m[j + 1];
    iv.g0 = t.gamma1[j];
    iv.g1 = t.gamma1[j + 1];
    iv.na0 = m_has_nabla_ad ? t.nabla_ad[j] : 0.0;
    iv.na1 = m_has_nabla_ad ? t.nabla_ad[j + 1] : 0.0;
    iv.P0 = t.P[j];
    iv.P1 = t.P[j + 1];
    iv.log_P = iv.P0 > 0.0 && iv.P1 > 0.0;
    iv.lnP0 = iv.log_P ? std::log(iv.P0) : 0.0;
    iv.lnP1 = iv.log_P ? std::log(iv.P1) : 0.0;
    iv.rho0 = t.rho[j];
    iv.rho1 = t.rho[j + 1];
    iv.log_rho = iv.rho0 > 0.0 && iv.rho1 > 0.0;
    iv.lnrho0 = iv.log_rho ? std::log(iv.rho0) : 0.0;
    iv.lnrho1 = iv.log_rho ? std::log(iv.rho1) : 0.0;
    m_iv.push_back(iv);
    m_node_r.push_back(t.r[j + 1]);
    m_discontinuity.push_back(false);
  }
}

StructurePoint Structure::at(std::size_t interval, double t) const {
  const Interval& iv = m_iv[interval];
  const double s = 1.0 - t;
  StructurePoint p;
  // Endpoints exactly reproduce the table rows (no exp(log()) round-off there).
  if (t == 0.0 || t == 1.0) {
    const bool right = t == 1.0;
    p.r = right ? iv.r1 : iv.r0;
    p.m = right ? iv.m1 : iv.m0;
    p.P = right ? iv.P1 : iv.P0;
    p.rho = right ? iv.rho1 : iv.rho0;
    p.gamma1 = right ? iv.g1 : iv.g0;
    p.nabla_ad = right ? iv.na1 : iv.na0;
    return p;
  }
  p.r = s * iv.r0 + t * iv.r1;
  p.m = s * iv.m0 + t * iv.m1;
  p.P = iv.log_P ? std::exp(s * iv.lnP0 + t * iv.lnP1) : s * iv.P0 + t * iv.P1;
  p.rho = iv.log_rho ? std::exp(s * iv.lnrho0 + t * iv.lnrho1) : s * iv.rho0 + t * iv.rho1;
  p.gamma1 = s * iv.g0 + t * iv.g1;
  p.nabla_ad = s * iv.na0 + t * iv.na1;
  return p;
}

std::size_t Structure::interval_of(double r, std::size_t* hint) const {
  const double lo = m_node_r.front(), hi = m_node_r.back();
  const double slack = 1e-12 * hi;
  if (!(r >= lo - slack && r <= hi + slack)) {
    std::ostringstream msg;
    msg.precision(17);
    msg << "radius " << r << " cm is outside the model (" << lo << " .. " << hi << " cm)";
    throw Error(ErrorKind::numerical, msg.str());
  }
  const std::size_t last = m_iv.size() - 1;
  auto inside = [&](std::size_t i) {
    return (r >= m_iv[i].r0 || i == 0) && (r < m_iv[i].r1 || i == last);
  };
  std::size_t found = last + 1;
  if (hint && *hint <= last) {
    const std::size_t h = *hint;
    if (inside(h)) found = h;
    else if (h < last && inside(h + 1)) found = h + 1;
    else if (h > 0 && inside(h - 1)) found = h - 1;
  }
  if (found > last) {
    // First node strictly greater than r; the interval ends there.
    const auto it = std::upper_bound(m_node_r.begin(), m_node_r.end(), r);
    const auto k = static_cast<std::size_t>(it - m_node_r.begin());
    found = k == 0 ? 0 : std::min(k - 1, last);
  }
  if (hint) *hint = found;
  return found;
}

StructurePoint Structure::at_radius(double r, std::size_t* hint) const {
  const std::size_t i = interval_of(r, hint);
  const Interval& iv = m_iv[i];
  const double t = std::clamp((r - iv.r0) / (iv.r1 - iv.r0), 0.0, 1.0);
  return at(i, t);
}

} // namespace radmode
