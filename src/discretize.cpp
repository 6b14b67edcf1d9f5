#include "radmode/discretize.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "pair.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <string>

namespace radmode {

namespace {

struct GaussRule {
  std::array<double, 5> t; ///< nodes on (0, 1)
  std::array<double, 5> w; ///< weights, summing to 1
};

// Gauss–Legendre rules on [0, 1] (nodes (1 + z)/2, weights w/2 of the [-1, 1] rule;
// Abramowitz & Stegun, Table 25.4).
GaussRule gauss_rule(int points) {
  GaussRule g{};
  switch (points) {
  case 1:
    g.t[0] = 0.5;
    g.w[0] = 1.0;
    break;
  case 2: {
    const double z = 1.0 / std::sqrt(3.0);
    g.t = {0.5 * (1 - z), 0.5 * (1 + z)};
    g.w = {0.5, 0.5};
    break;
  }
  case 3: {
    const double z = std::sqrt(0.6);
    g.t = {0.5 * (1 - z), 0.5, 0.5 * (1 + z)};
    g.w = {5.0 / 18.0, 8.0 / 18.0, 5.0 / 18.0};
    break;
  }
  case 4: {
    const double z1 = std::sqrt(3.0 / 7.0 - 2.0 / 7.0 * std::sqrt(6.0 / 5.0));
    const double z2 = std::sqrt(3.0 / 7.0 + 2.0 / 7.0 * std::sqrt(6.0 / 5.0));
    const double w1 = (18.0 + std::sqrt(30.0)) / 36.0, w2 = (18.0 - std::sqrt(30.0)) / 36.0;
    g.t = {0.5 * (1 - z2), 0.5 * (1 - z1), 0.5 * (1 + z1), 0.5 * (1 + z2)};
    g.w = {0.5 * w2, 0.5 * w1, 0.5 * w1, 0.5 * w2};
    break;
  }
  default: {
    const double z1 = std::sqrt(5.0 - 2.0 * std::sqrt(10.0 / 7.0)) / 3.0;
    const double z2 = std::sqrt(5.0 + 2.0 * std::sqrt(10.0 / 7.0)) / 3.0;
    const double w0 = 128.0 / 225.0, w1 = (322.0 + 13.0 * std::sqrt(70.0)) / 900.0,
                 w2 = (322.0 - 13.0 * std::sqrt(70.0)) / 900.0;
    g.t = {0.5 * (1 - z2), 0.5 * (1 - z1), 0.5, 0.5 * (1 + z1), 0.5 * (1 + z2)};
    g.w = {0.5 * w2, 0.5 * w1, 0.5 * w0, 0.5 * w1, 0.5 * w2};
    break;
  }
  }
  return g;
}

/// Checks the arguments of a sampler and lays out the quadrature points: x, the rule, t and w
/// filled; a, b, c, d sized (to be filled by the caller).
WeakForm quadrature_layout(std::vector<double> x, int points_per_interval) {
  if (points_per_interval < 1 || points_per_interval > 5)
    throw UsageError("quadrature points per interval: expected 1..5, got " +
                     std::to_string(points_per_interval));
  if (x.size() < 2) throw UsageError("finite-element mesh: expected at least 2 nodes");
  for (std::size_t i = 1; i < x.size(); ++i)
    if (!(x[i] > x[i - 1]))
      throw UsageError("finite-element mesh: nodes must increase strictly (node " +
                       std::to_string(i) + ")");
  WeakForm f;
  f.x = std::move(x);
  f.points_per_interval = points_per_interval;
  const auto q = static_cast<std::size_t>(points_per_interval);
  const std::size_t total = f.interval_count() * q;
  for (auto* v : {&f.t, &f.w, &f.a, &f.b, &f.c, &f.d}) v->resize(total);
  const GaussRule g = gauss_rule(points_per_interval);
  for (std::size_t i = 0; i < f.interval_count(); ++i) {
    const double h = f.x[i + 1] - f.x[i];
    for (std::size_t k = 0; k < q; ++k) {
      f.t[i * q + k] = g.t[k];
      f.w[i * q + k] = g.w[k] * h;
    }
  }
  return f;
}

} // namespace

WeakForm sample_form(std::vector<double> x,
                     const std::function<FormCoefficients(std::size_t, double, double)>& coefficients,
                     int points_per_interval) {
  WeakForm f = quadrature_layout(std::move(x), points_per_interval);
  const auto q = static_cast<std::size_t>(points_per_interval);
  for (std::size_t i = 0; i < f.interval_count(); ++i) {
    const double h = f.x[i + 1] - f.x[i];
    for (std::size_t j = i * q; j < (i + 1) * q; ++j) {
      const FormCoefficients c = coefficients(i, f.t[j], f.x[i] + f.t[j] * h);
      f.a[j] = c.a;
      f.b[j] = c.b;
      f.c[j] = c.c;
      f.d[j] = c.d;
    }
  }
  return f;
}

double omega2_unit(const Structure& s) {
  const double R = s.radius();
  return constants::G * s.mass() / (R * R * R);
}

StellarUnits stellar_units(const Structure& s) {
  const double R = s.radius(), M = s.mass();
  const double P_unit = constants::G * M * M / (R * R * R * R);
  const double rho_unit = M / (R * R * R);
  StellarUnits u;
  u.inv_P = 1.0 / P_unit;
  u.inv_rho = 1.0 / rho_unit;
  u.inv_M = 1.0 / M;
  return u;
}

namespace {

/// The stellar form's base mesh: node_r / R, the surface exactly at x = 1.
std::vector<double> stellar_mesh(const Structure& s) {
  const double R = s.radius();
  const std::vector<double>& node_r = s.node_r();
  std::vector<double> x(node_r.size(), 1.0);
  for (std::size_t i = 0; i + 1 < x.size(); ++i) x[i] = node_r[i] / R;
  return x;
}

/// Blocks of intervals whose quadrature points Structure::values_at_rule evaluates together
/// (the same local coordinates in every interval).
constexpr std::size_t form_block = 64;

/// The stellar form's surface terms (regular surface only; see discretize.hpp).
void set_surface_terms(WeakForm& f, const Structure& s, SurfaceCondition surface,
                       const StellarUnits& units) {
  if (surface == SurfaceCondition::regular) {
    const double Ps = s.surface_pressure() * units.inv_P;
    f.k_last = -4.0 * Ps;
    f.m_last = Ps;
  }
}

} // namespace

WeakForm make_stellar_form(const Structure& s, SurfaceCondition surface,
                           const Structure* coefficients_from) {
  const StellarUnits units = stellar_units(s);
  const std::vector<double>& node_r = s.node_r();
  WeakForm f = quadrature_layout(stellar_mesh(s), default_quadrature_points);
  constexpr auto q = static_cast<std::size_t>(default_quadrature_points);
  // The coefficients at point j (interval i, position x) from the structure's values there.
  auto store = [&](std::size_t j, double xq, const StructureValues& p) {
    const FormCoefficients c = stellar_coefficients(p, xq, units);
    f.a[j] = c.a;
    f.b[j] = c.b;
    f.c[j] = c.c;
    f.d[j] = c.d;
  };
  if (!coefficients_from) {
    constexpr std::size_t block = form_block;
    std::array<StructureValues, block * q> values{};
    const std::size_t ni = f.interval_count();
    for (std::size_t i0 = 0; i0 < ni; i0 += block) {
      const std::size_t i1 = std::min(ni, i0 + block);
      s.values_at_rule(i0, i1, f.t.data(), q, values.data());
      for (std::size_t i = i0; i < i1; ++i) {
        const double xi = f.x[i], hx = f.x[i + 1] - xi;
        for (std::size_t j = i * q; j < (i + 1) * q; ++j)
          store(j, xi + f.t[j] * hx, values[j - i0 * q]);
      }
    }
  } else {
    // When the base mesh nests in `coefficients_from`'s (every_other_row), each base interval
    // lies inside one of its intervals: found once per base interval by the midpoint, marching
    // outward. A point outside it (meshes that do not nest) is looked up on its own.
    const Structure& from = *coefficients_from;
    const std::vector<double>& from_r = from.node_r();
    std::size_t hint = 0;
    for (std::size_t i = 0; i < f.interval_count(); ++i) {
      const double xi = f.x[i], hx = f.x[i + 1] - xi;
      const double r0 = node_r[i], hr = node_r[i + 1] - r0;
      const std::size_t k = from.interval_of(r0 + 0.5 * hr, &hint);
      const double k0 = from_r[k], inv_kh = 1.0 / (from_r[k + 1] - k0);
      for (std::size_t j = i * q; j < (i + 1) * q; ++j) {
        const double t = f.t[j], r = r0 + t * hr;
        double u = (r - k0) * inv_kh;
        std::size_t kk = k;
        if (!(u >= 0.0 && u <= 1.0)) {
          std::size_t point_hint = k;
          kk = from.interval_of(r, &point_hint);
          u = (r - from_r[kk]) / (from_r[kk + 1] - from_r[kk]);
        }
        store(j, xi + t * hx, from.values_at(kk, std::clamp(u, 0.0, 1.0)));
      }
    }
  }
  set_surface_terms(f, s, surface, units);
  return f;
}

std::vector<std::size_t> all_nodes(const WeakForm& form) {
  return form.x.empty() ? std::vector<std::size_t>{} : all_nodes(form.interval_count());
}

std::vector<std::size_t> all_nodes(std::size_t last) {
  std::vector<std::size_t> n(last + 1);
  for (std::size_t i = 0; i < n.size(); ++i) n[i] = i;
  return n;
}

std::vector<std::size_t> every_other_node(const WeakForm& form, const std::vector<bool>& keep) {
  return every_other_node(form.interval_count(), keep);
}

std::vector<std::size_t> every_other_node(std::size_t last, const std::vector<bool>& keep) {
  return every_other_node_keeping(last, flagged_nodes(keep));
}

std::vector<std::size_t> flagged_nodes(const std::vector<bool>& flags) {
  std::vector<std::size_t> out;
  for (std::size_t i = 0; i < flags.size(); ++i)
    if (flags[i]) out.push_back(i);
  return out;
}

std::vector<std::size_t> every_other_node_keeping(std::size_t last,
                                                  const std::vector<std::size_t>& kept) {
  for (std::size_t k = 1; k < kept.size(); ++k)
    if (kept[k] <= kept[k - 1])
      throw UsageError("every_other_node_keeping: kept nodes must increase strictly");
  // Segments between kept nodes are halved; a segment with an odd number of intervals gets
  // its single-interval element at its inner end (next to the centre the r^4 weights make
  // that element's contribution smallest; at the surface it would hide the error there from
  // the Richardson comparison).
  std::vector<std::size_t> n;
  n.reserve(last / 2 + 2 + kept.size());
  n.push_back(0);
  std::size_t a = 0, next = 0; // kept[next]: the first kept node after a
  while (a < last) {
    while (next < kept.size() && kept[next] <= a) ++next;
    const std::size_t b = next < kept.size() && kept[next] < last ? kept[next] : last;
    std::size_t i = a;
    if ((b - a) % 2 == 1) n.push_back(++i);
    while (i < b) n.push_back(i += 2);
    a = b;
  }
  return n;
}

std::optional<Structure> every_other_row(const Structure& s) {
  const StellarModel& t = s.table();
  const std::vector<std::size_t> keep_nodes =
      every_other_node_keeping(s.interval_count(), s.discontinuity_nodes());
  // Rows map to nodes in order: a repeated radius gives two rows on one node. Walk both.
  std::vector<std::size_t> rows;
  rows.reserve(keep_nodes.size() + 16);
  std::size_t node = 0, next = 0; // keep_nodes[next] is the first kept node >= node
  for (std::size_t j = 0; j < t.size(); ++j) {
    if (j > 0 && t.r[j] != t.r[j - 1]) ++node;
    while (next < keep_nodes.size() && keep_nodes[next] < node) ++next;
    if (next < keep_nodes.size() && keep_nodes[next] == node) rows.push_back(j);
  }
  if (rows.size() < StellarModel::min_points) return std::nullopt;
  StellarModel c;
  auto pick = [&](const std::vector<double>& from, std::vector<double>& to) {
    if (from.empty()) return;
    to.resize(rows.size());
    for (std::size_t k = 0; k < rows.size(); ++k) to[k] = from[rows[k]];
  };
  pick(t.r, c.r);
  pick(t.m, c.m);
  pick(t.P, c.P);
  pick(t.rho, c.rho);
  pick(t.gamma1, c.gamma1);
  pick(t.nabla_ad, c.nabla_ad);
  c.source = t.source;
  // The per-row values that depend on their own row only (logs, dP/dr, dm/dr) are taken over;
  // the finite-difference slopes are recomputed by the preparation.
  const std::size_t n = t.size(), nc = rows.size();
  std::vector<double> row_values(Structure::row_columns * nc);
  for (std::size_t col = 0; col < Structure::row_columns_known; ++col) {
    const double* from = s.m_row.data() + col * n;
    double* to = row_values.data() + col * nc;
    for (std::size_t k = 0; k < nc; ++k) to[k] = from[rows[k]];
  }
  // A subset of a prepared (valid) table keeping its first row, its surface and both rows of
  // every discontinuity is valid and starts at the same inner radius: prepared directly,
  // without validating or extending it again.
  return Structure(std::move(c), s.inner(), std::move(row_values), Structure::Prepared{});
}

namespace {

using detail::Pair; // two doubles per instruction, each lane the double arithmetic

/// Element integrals of the hat functions (left l, right r) of one element, summed over its
/// quadrature points; T = double, or Pair for two elements at once.
template <class T> struct ElementSumsOf {
  T kll{}, krr{}, klr{}, mll{}, mrr{}, mlr{};

  /// Adds the point xq of weight w with coefficients a, b, c, d (element [xr - h, xr],
  /// inv_h = 1/h, inv_h2 = inv_h^2).
  void add(T xq, T xr, T inv_h, T inv_h2, T w, T fa, T fb, T c, T d) {
    const T pl = (xr - xq) * inv_h, pr = 1.0 - pl;
    const T a = fa * inv_h2, b = fb * inv_h;
    kll += w * (a - 2.0 * b * pl + c * pl * pl);
    krr += w * (a + 2.0 * b * pr + c * pr * pr);
    klr += w * (-a + b * (pl - pr) + c * pl * pr);
    mll += w * d * pl * pl;
    mrr += w * d * pr * pr;
    mlr += w * d * pl * pr;
  }

  /// Adds the sums of element e, coupling mesh nodes e and e + 1, i.e. unknowns e - lo and
  /// e + 1 - lo of `p` (unknowns lo .. hi - 1); entries of removed (fixed) nodes are dropped.
  void scatter(std::size_t e, std::size_t lo, std::size_t hi, TridiagonalPencil& p) const {
    if (e >= lo && e < hi) {
      p.k_diag[e - lo] += kll;
      p.m_diag[e - lo] += mll;
    }
    if (e + 1 >= lo && e + 1 < hi) {
      p.k_diag[e + 1 - lo] += krr;
      p.m_diag[e + 1 - lo] += mrr;
    }
    if (e >= lo && e + 1 < hi) {
      p.k_off[e - lo] += klr;
      p.m_off[e - lo] += mlr;
    }
  }

  /// Lane l of a Pair's sums.
  ElementSumsOf<double> lane(int l) const {
    return {kll[l], krr[l], klr[l], mll[l], mrr[l], mlr[l]};
  }
};
using ElementSums = ElementSumsOf<double>;

/// Element integrals of the hat functions (left l, right r) on every element of `nodes`,
/// added into the pencil `p` whose unknowns are mesh nodes lo .. hi - 1; Q points per base
/// interval (a compile-time count, so the point loop unrolls).
template <std::size_t Q>
void add_elements(const WeakForm& f, const std::vector<std::size_t>& nodes, std::size_t lo,
                  std::size_t hi, TridiagonalPencil& p) {
  const double* x = f.x.data();
  const double *ft = f.t.data(), *fw = f.w.data(), *fa = f.a.data(), *fb = f.b.data(),
               *fc = f.c.data(), *fd = f.d.data();
  const std::size_t nn = nodes.size();
  for (std::size_t e = 0; e + 1 < nn; ++e) {
    const double xl = x[nodes[e]], xr = x[nodes[e + 1]];
    const double h = xr - xl, inv_h = 1.0 / h, inv_h2 = inv_h * inv_h;
    ElementSums sums;
    for (std::size_t i = nodes[e]; i < nodes[e + 1]; ++i) {
      const double x0 = x[i], hx = x[i + 1] - x0;
      for (std::size_t j = i * Q; j < i * Q + Q; ++j)
        sums.add(x0 + ft[j] * hx, xr, inv_h, inv_h2, fw[j], fa[j], fb[j], fc[j], fd[j]);
    }
    sums.scatter(e, lo, hi, p);
  }
}

/// An empty pencil for unknowns lo .. hi - 1 of the mesh `nodes`.
TridiagonalPencil empty_pencil(const std::vector<std::size_t>& nodes, std::size_t lo,
                               std::size_t hi) {
  TridiagonalPencil p;
  p.k_diag.assign(hi - lo, 0.0);
  p.m_diag.assign(hi - lo, 0.0);
  p.k_off.assign(hi - lo - 1, 0.0);
  p.m_off.assign(hi - lo - 1, 0.0);
  p.node.assign(nodes.begin() + static_cast<std::ptrdiff_t>(lo),
                nodes.begin() + static_cast<std::ptrdiff_t>(hi));
  return p;
}

/// The boundary terms of `f` added to the pencil of unknowns lo .. hi - 1 of nn mesh nodes.
void add_boundary_terms(const WeakForm& f, std::size_t lo, std::size_t hi, std::size_t nn,
                        TridiagonalPencil& p) {
  if (lo == 0) {
    p.k_diag.front() += f.k_first;
    p.m_diag.front() += f.m_first;
  }
  if (hi == nn) {
    p.k_diag.back() += f.k_last;
    p.m_diag.back() += f.m_last;
  }
}

} // namespace

TridiagonalPencil assemble(const WeakForm& f, const MeshSelection& mesh) {
  const auto& nodes = mesh.nodes;
  const std::size_t last = f.interval_count();
  if (nodes.size() < 2 || nodes.front() != 0 || nodes.back() != last)
    throw UsageError("finite-element mesh: the selection must start at the first base node and "
                     "end at the last");
  for (std::size_t e = 1; e < nodes.size(); ++e)
    if (nodes[e] <= nodes[e - 1])
      throw UsageError("finite-element mesh: selected nodes must increase strictly");
  const std::size_t nn = nodes.size();
  const std::size_t lo = mesh.fix_first ? 1 : 0;
  const std::size_t hi = mesh.fix_last ? nn - 1 : nn; // one past the last unknown
  if (hi <= lo + 1) throw UsageError("finite-element mesh: fewer than 2 unknowns remain");
  TridiagonalPencil p = empty_pencil(nodes, lo, hi);
  switch (f.points_per_interval) {
  case 1: add_elements<1>(f, nodes, lo, hi, p); break;
  case 2: add_elements<2>(f, nodes, lo, hi, p); break;
  case 3: add_elements<3>(f, nodes, lo, hi, p); break;
  case 4: add_elements<4>(f, nodes, lo, hi, p); break;
  case 5: add_elements<5>(f, nodes, lo, hi, p); break;
  default:
    throw UsageError("quadrature points per interval: expected 1..5, got " +
                     std::to_string(f.points_per_interval));
  }
  add_boundary_terms(f, lo, hi, nn, p);
  return p;
}

ModelPencil assemble_stellar_form(const Structure& s, SurfaceCondition surface, bool fix_first) {
  // make_stellar_form's sampling and add_elements' integration on all base nodes, fused: the
  // same arithmetic on the same numbers (the point's x, weight and coefficients as
  // make_stellar_form stores them), so the pencil is assemble's bit for bit.
  ModelPencil out;
  out.x = stellar_mesh(s);
  const std::vector<double>& x = out.x;
  const std::size_t ni = x.size() - 1, nn = x.size();
  const std::size_t lo = fix_first ? 1 : 0, hi = nn;
  if (hi <= lo + 1) throw UsageError("finite-element mesh: fewer than 2 unknowns remain");
  out.pencil = empty_pencil(all_nodes(ni), lo, hi);
  TridiagonalPencil& p = out.pencil;
  const StellarUnits units = stellar_units(s);
  constexpr auto q = static_cast<std::size_t>(default_quadrature_points);
  const GaussRule g = gauss_rule(default_quadrature_points);
  std::array<StructureValues, form_block * q> values;
  for (std::size_t i0 = 0; i0 < ni; i0 += form_block) {
    const std::size_t i1 = std::min(ni, i0 + form_block);
    s.values_at_rule(i0, i1, g.t.data(), q, values.data());
    // Two elements at a time (T = Pair: lane 0 interval i, lane 1 interval i + 1), the last
    // one of an odd block alone (T = double): the same operations on each.
    auto element = [&](auto zero, std::size_t i, auto pick) {
      using T = decltype(zero);
      const T xi = pick([&](std::size_t j) { return x[j]; }, i);
      const T xr = pick([&](std::size_t j) { return x[j + 1]; }, i);
      const T hx = xr - xi;
      const T inv_h = 1.0 / hx, inv_h2 = inv_h * inv_h;
      ElementSumsOf<T> sums;
      for (std::size_t k = 0; k < q; ++k) {
        const T xq = xi + g.t[k] * hx;
        auto v = [&](double StructureValues::*field) {
          return pick([&](std::size_t j) { return values[(j - i0) * q + k].*field; }, i);
        };
        const auto c = detail::stellar_coefficients_of(v(&StructureValues::m),
                                                       v(&StructureValues::P),
                                                       v(&StructureValues::rho),
                                                       v(&StructureValues::gamma1), xq, units);
        sums.add(xq, xr, inv_h, inv_h2, g.w[k] * hx, c.a, c.b, c.c, c.d);
      }
      return sums;
    };
    const auto one = [](auto&& f, std::size_t j) { return f(j); };
    const auto two = [](auto&& f, std::size_t j) { return Pair{f(j), f(j + 1)}; };
    std::size_t i = i0;
    for (; i + 2 <= i1; i += 2) {
      const ElementSumsOf<Pair> sums = element(Pair{}, i, two);
      sums.lane(0).scatter(i, lo, hi, p);
      sums.lane(1).scatter(i + 1, lo, hi, p);
    }
    if (i < i1) element(0.0, i, one).scatter(i, lo, hi, p);
  }
  WeakForm ends; // the boundary terms, as make_stellar_form sets them
  set_surface_terms(ends, s, surface, units);
  add_boundary_terms(ends, lo, hi, nn, p);
  return out;
}

int inertia_below(const TridiagonalPencil& p, double s) {
  // The twisted factorization K - s M = N D N^T at row t = n / 2 (N unit lower bidiagonal
  // above row t, upper below it): the pivots of rows 0 .. t-1 from the first row down, those
  // of rows n-1 .. t+1 from the last row up, and row t's from both sides. D is diagonal, so by
  // Sylvester's law its negative entries count the eigenvalues below s. The two recurrences
  // are independent: inertia_below_many runs them side by side, which halves the chain of
  // dependent divisions that bounds its speed. Each pivot (and row t's) is formed in the order
  // written here, so inertia_below_many's counts are these, shift by shift.
  const std::size_t n = p.size();
  if (n == 0) return 0;
  const std::size_t t = n / 2;
  auto pivot = [](double v) { return v == 0.0 ? -1e-300 : v; };
  int negative = 0;
  double d = 0.0, u = 0.0; // the last pivot of each side
  for (std::size_t j = 0; j < t; ++j) {
    double piv = p.k_diag[j] - s * p.m_diag[j];
    if (j > 0) {
      const double e = p.k_off[j - 1] - s * p.m_off[j - 1];
      piv -= e * e / d;
    }
    d = pivot(piv);
    negative += d < 0.0;
  }
  for (std::size_t j = n - 1; j > t; --j) {
    double piv = p.k_diag[j] - s * p.m_diag[j];
    if (j + 1 < n) {
      const double e = p.k_off[j] - s * p.m_off[j];
      piv -= e * e / u;
    }
    u = pivot(piv);
    negative += u < 0.0;
  }
  double twist = p.k_diag[t] - s * p.m_diag[t];
  if (t > 0) {
    const double e = p.k_off[t - 1] - s * p.m_off[t - 1];
    twist -= e * e / d;
  }
  if (t + 1 < n) {
    const double e = p.k_off[t] - s * p.m_off[t];
    twist -= e * e / u;
  }
  return negative + (pivot(twist) < 0.0);
}

} // namespace radmode
