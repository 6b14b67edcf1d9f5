#include "radmode/modes.hpp"

#include "radmode/constants.hpp"
#include "radmode/error.hpp"
#include "radmode/structure.hpp"

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <sstream>

namespace radmode {

namespace {

using constants::G;
using constants::pi;

double lerp(double a, double b, double t) { return a + t * (b - a); }

/// Node values of xi' from the element slopes (see modes.hpp).
std::vector<double> node_derivative(const std::vector<double>& r, const std::vector<double>& xi) {
  const std::size_t n = r.size();
  std::vector<double> d(n, 0.0);
  if (n < 2) return d;
  const auto slope = [&](std::size_t e) { return (xi[e + 1] - xi[e]) / (r[e + 1] - r[e]); };
  // Derivative at node i of the parabola through nodes i, j, k (second order, any spacing):
  // the slopes of the two chords combined as for an interior node, extrapolated to i.
  const auto end_derivative = [&](std::size_t i, std::size_t j, std::size_t k) {
    const double hj = r[j] - r[i];
    const double hk = r[k] - r[i];
    const double sj = (xi[j] - xi[i]) / hj;
    const double sk = (xi[k] - xi[i]) / hk;
    return (sj * hk - sk * hj) / (hk - hj);
  };
  for (std::size_t i = 0; i < n; ++i) {
    if (n == 2) {
      d[i] = slope(0);
    } else if (i == 0) {
      d[i] = end_derivative(0, 1, 2);
    } else if (i + 1 == n) {
      d[i] = end_derivative(n - 1, n - 2, n - 3);
    } else {
      const double hl = r[i] - r[i - 1];
      const double hr = r[i + 1] - r[i];
      d[i] = (hl * slope(i) + hr * slope(i - 1)) / (hl + hr);
    }
  }
  return d;
}

/// Element-wise integrals of the energy form for a piecewise-linear xi on the nodes r.
struct EnergyIntegrals {
  double kinetic = 0;   ///< int rho r^4 xi^2 dr  [g cm^2]
  double potential = 0; ///< int [Gamma1 P r^2 (3xi + r xi')^2 - 4 G m rho r xi^2] dr
};

EnergyIntegrals integrate_energy(const Structure& structure, const std::vector<double>& r,
                                 const std::vector<double>& xi) {
  EnergyIntegrals out;
  std::size_t hint = 0;
  const double g = 0.5 / std::sqrt(3.0); // Gauss-Legendre points at mid +- g h
  for (std::size_t e = 0; e + 1 < r.size(); ++e) {
    const double h = r[e + 1] - r[e];
    if (!(h > 0)) continue;
    const double s = (xi[e + 1] - xi[e]) / h;
    for (const double offset : {0.5 - g, 0.5 + g}) {
      const double x = r[e] + offset * h;
      const double xv = lerp(xi[e], xi[e + 1], offset);
      const StructurePoint c = structure.at_radius(x, &hint);
      const double y = 3.0 * xv + x * s;
      out.kinetic += 0.5 * h * c.rho * x * x * x * x * xv * xv;
      out.potential += 0.5 * h * (c.gamma1 * c.P * x * x * y * y - 4.0 * G * c.m * c.rho * x * xv * xv);
    }
  }
  return out;
}

} // namespace

std::string mode_label(int order) {
  if (order < 0) return "?";
  if (order == 0) return "F";
  return std::to_string(order) + "O";
}

ModelScales model_scales(const StellarModel& model) {
  ModelScales s;
  s.mass_g = model.mass();
  s.radius_cm = model.radius();
  const double R = s.radius_cm;
  s.mean_density = 3.0 * s.mass_g / (4.0 * pi * R * R * R);
  s.t_dyn_s = 1.0 / std::sqrt(G * s.mean_density);
  s.t_kepler_s = std::sqrt(R * R * R / (G * s.mass_g));
  return s;
}

double pulsation_constant_d(double period_s, double mass_g, double radius_cm) {
  return period_s / constants::day_s * std::sqrt(mass_g / constants::M_sun) *
         std::pow(radius_cm / constants::R_sun, -1.5);
}

ModeReport make_mode_report(const StellarModel& model, const ModeSet& set,
                            const SolveOptions& options) {
  ModeReport report;
  report.scales = model_scales(model);
  const ModelScales& sc = report.scales;
  const double M = sc.mass_g;
  const double R = sc.radius_cm;
  const double unit_omega2 = G * M / (R * R * R); // omega^2 of sigma^2 = 1
  const bool regular_surface = options.surface == SurfaceCondition::regular;
  const double Ps = regular_surface ? model.surface_pressure() : 0.0;
  const std::vector<double>& r = set.node_r;
  const Structure structure(model, options.inner);
  const std::size_t n = r.size();

  for (const ModeSolution& sol : set.modes) {
    if (sol.xi.size() != n)
      throw Error(ErrorKind::numerical,
                  "mode report: eigenfunction of order " + std::to_string(sol.order) + " has " +
                      std::to_string(sol.xi.size()) + " values but the mesh has " +
                      std::to_string(n) + " nodes");
    ModeQuantities q;
    q.order = sol.order;
    q.label = mode_label(sol.order);
    q.nodes = sol.nodes;
    q.order_agrees = sol.order_agrees;
    q.omega2_s2 = sol.omega2;
    q.sigma2 = sol.omega2 / unit_omega2;
    q.trusted = sol.trusted;
    q.flag = sol.flag;
    q.error_estimate_s2 = sol.error_estimate;
    if (sol.omega2 != 0.0 && options.richardson)
      q.error_estimate_rel = sol.error_estimate / std::fabs(sol.omega2);
    q.sign_uncertain = std::fabs(sol.omega2) <= sol.error_estimate;
    q.stable = sol.omega2 > 0.0;

    if (q.sign_uncertain) {
      // Neither a period nor a growth time: the mode may be either.
    } else if (sol.omega2 > 0.0) {
      const double omega = std::sqrt(sol.omega2);
      const double period = 2.0 * pi / omega;
      q.period_s = period;
      q.period_h = period / constants::hour_s;
      q.period_d = period / constants::day_s;
      q.frequency_uHz = 1e6 / period;
      q.frequency_cd = constants::day_s / period;
      q.Q_d = pulsation_constant_d(period, M, R);
      q.omega_t_dyn = omega * sc.t_dyn_s;
    } else {
      const double eta = std::sqrt(-sol.omega2);
      q.growth_rate_s = eta;
      if (eta > 0) {
        q.growth_time_s = 1.0 / eta;
        q.growth_time_t_dyn = 1.0 / eta / sc.t_dyn_s;
      }
    }

    // Eigenfunction, normalized to xi(R) = 1 when possible.
    std::vector<double> xi = sol.xi;
    const double xs = n > 0 ? xi.back() : 0.0;
    const bool normalizable = std::isfinite(xs) && xs != 0.0;
    if (normalizable)
      for (double& v : xi) v /= xs;

    ModeProfile prof;
    prof.order = q.order;
    prof.label = q.label;
    if (n >= 2) {
      const EnergyIntegrals I = integrate_energy(structure, r, xi);
      const double xiR = xi.back();
      const double mass_form = I.kinetic + std::pow(R, 6) * Ps / (G * M) * xiR * xiR;
      const double stiffness = I.potential - 4.0 * R * R * R * Ps * xiR * xiR;
      if (normalizable) q.inertia = 4.0 * pi * I.kinetic / (M * R * R * xiR * xiR);
      if (mass_form > 0) q.omega2_rayleigh_s2 = stiffness / mass_form;

      const std::vector<double> dxi = node_derivative(r, xi);
      const bool has_nabla = structure.has_nabla_ad();
      const double to_dimless = mass_form > 0 ? R / (unit_omega2 * mass_form) : 0.0;
      std::size_t hint = 0;
      for (std::size_t i = 0; i < n; ++i) {
        const StructurePoint c = structure.at_radius(r[i], &hint);
        const double y = 3.0 * xi[i] + r[i] * dxi[i]; // = -delta rho / rho
        prof.r_over_R.push_back(r[i] / R);
        prof.m_over_M.push_back(c.m / M);
        prof.xi.push_back(xi[i]);
        prof.drho_rho.push_back(-y);
        prof.dP_P.push_back(-c.gamma1 * y);
        if (has_nabla) prof.dT_T.push_back(-c.nabla_ad * c.gamma1 * y);
        const double compression = c.P * r[i] * r[i] * y * y;
        prof.weight.push_back(
            (c.gamma1 * compression - 4.0 * G * c.m * c.rho * r[i] * xi[i] * xi[i]) * to_dimless);
        prof.gamma1_kernel.push_back(compression * to_dimless);
      }
      if (regular_surface) prof.surface_dP_P_condition = -(4.0 + q.sigma2) * xi.back();
    }
    report.modes.push_back(std::move(q));
    report.profiles.push_back(std::move(prof));
  }

  // Period ratios P_k / P_0 relative to the oscillatory fundamental.
  const auto fundamental = std::find_if(report.modes.begin(), report.modes.end(),
                                        [](const ModeQuantities& q) { return q.order == 0; });
  if (fundamental == report.modes.end()) {
    report.period_ratio_note = "no period ratios: the fundamental mode is not among the modes";
  } else if (!fundamental->period_s) {
    report.period_ratio_note = "no period ratios: the fundamental mode has no established "
                               "period (omega^2 <= 0, or within its error estimate)";
  } else {
    for (const ModeQuantities& q : report.modes)
      if (q.order > 0 && q.period_s)
        report.period_ratios.push_back({q.order, q.label, *q.period_s / *fundamental->period_s});
    if (report.period_ratios.empty())
      report.period_ratio_note = "no period ratios: no oscillatory overtone among the modes";
  }
  return report;
}

namespace {

template <class T> void opt_field(JsonWriter& json, const char* name, const std::optional<T>& v) {
  json.key(name);
  if (v)
    json.value(*v);
  else
    json.null();
}

std::string csv_number(const std::optional<double>& v) {
  return v ? JsonWriter::number(*v) : std::string();
}

std::string csv_text(const std::string& s) {
  if (s.find_first_of(",\"\n") == std::string::npos) return s;
  std::string out = "\"";
  for (char ch : s) {
    if (ch == '"') out += '"';
    out += ch;
  }
  return out + "\"";
}

} // namespace

void write_mode_json(JsonWriter& json, const ModeQuantities& q) {
  json.begin_object();
  json.field("order", q.order);
  json.field("label", q.label);
  json.field("nodes", q.nodes);
  json.field("omega2_s2", q.omega2_s2);
  json.field("sigma2", q.sigma2);
  opt_field(json, "period_s", q.period_s);
  opt_field(json, "period_h", q.period_h);
  opt_field(json, "period_d", q.period_d);
  opt_field(json, "frequency_uHz", q.frequency_uHz);
  opt_field(json, "frequency_cd", q.frequency_cd);
  opt_field(json, "Q_d", q.Q_d);
  opt_field(json, "omega_t_dyn", q.omega_t_dyn);
  opt_field(json, "inertia", q.inertia);
  json.field("error_estimate_s2", q.error_estimate_s2);
  opt_field(json, "error_estimate_rel", q.error_estimate_rel);
  opt_field(json, "omega2_rayleigh_s2", q.omega2_rayleigh_s2);
  json.field("order_check", q.order_agrees ? "agree" : "disagree");
  json.field("stable", q.stable);
  json.field("sign_uncertain", q.sign_uncertain);
  opt_field(json, "growth_rate_s", q.growth_rate_s);
  opt_field(json, "growth_time_s", q.growth_time_s);
  opt_field(json, "growth_time_t_dyn", q.growth_time_t_dyn);
  json.field("trusted", q.trusted);
  json.field("flag", q.flag);
  json.end_object();
}

std::string mode_csv_header() {
  return "order,label,nodes,omega2_s2,sigma2,period_s,period_h,period_d,frequency_uHz,"
         "frequency_cd,Q_d,omega_t_dyn,inertia,error_estimate_s2,error_estimate_rel,"
         "omega2_rayleigh_s2,order_check,stable,sign_uncertain,growth_rate_s,growth_time_s,"
         "growth_time_t_dyn,trusted,flag";
}

std::string mode_csv_row(const ModeQuantities& q) {
  std::ostringstream s;
  s << q.order << ',' << csv_text(q.label) << ',' << q.nodes << ','
    << JsonWriter::number(q.omega2_s2) << ',' << JsonWriter::number(q.sigma2) << ','
    << csv_number(q.period_s) << ',' << csv_number(q.period_h) << ','
    << csv_number(q.period_d) << ',' << csv_number(q.frequency_uHz) << ','
    << csv_number(q.frequency_cd) << ',' << csv_number(q.Q_d) << ','
    << csv_number(q.omega_t_dyn) << ',' << csv_number(q.inertia) << ','
    << JsonWriter::number(q.error_estimate_s2) << ',' << csv_number(q.error_estimate_rel) << ','
    << csv_number(q.omega2_rayleigh_s2) << ',' << (q.order_agrees ? "agree" : "disagree") << ','
    << (q.stable ? "true" : "false") << ',' << (q.sign_uncertain ? "true" : "false") << ','
    << csv_number(q.growth_rate_s) << ',' << csv_number(q.growth_time_s) << ','
    << csv_number(q.growth_time_t_dyn) << ',' << (q.trusted ? "true" : "false") << ','
    << csv_text(q.flag);
  return s.str();
}

std::string format_profiles(const ModeReport& report, const std::string& model_source) {
  std::ostringstream s;
  const bool has_dT = !report.profiles.empty() && !report.profiles.front().dT_T.empty();
  s << "# radmode mode profiles\n"
    << "# model = " << model_source << '\n'
    << "# mass_g = " << JsonWriter::number(report.scales.mass_g) << '\n'
    << "# radius_cm = " << JsonWriter::number(report.scales.radius_cm) << '\n'
    << "# normalization: xi(R) = 1; weight and gamma1_kernel in units of (G M/R^3) per unit "
       "r/R\n"
    << "order,label,r_over_R,m_over_M,xi,dP_P,drho_rho," << (has_dT ? "dT_T," : "")
    << "weight,gamma1_kernel\n";
  for (const ModeProfile& p : report.profiles) {
    if (p.surface_dP_P_condition && !p.dP_P.empty())
      s << "# " << p.label << ": dP_P at R = " << JsonWriter::number(p.dP_P.back())
        << "; the regular surface condition gives -(4 + sigma^2) xi(R) = "
        << JsonWriter::number(*p.surface_dP_P_condition) << '\n';
    for (std::size_t i = 0; i < p.xi.size(); ++i) {
      s << p.order << ',' << p.label << ',' << JsonWriter::number(p.r_over_R[i]) << ','
        << JsonWriter::number(p.m_over_M[i]) << ',' << JsonWriter::number(p.xi[i]) << ','
        << JsonWriter::number(p.dP_P[i]) << ',' << JsonWriter::number(p.drho_rho[i]) << ',';
      if (has_dT) s << JsonWriter::number(p.dT_T[i]) << ',';
      s << JsonWriter::number(p.weight[i]) << ',' << JsonWriter::number(p.gamma1_kernel[i])
        << '\n';
    }
  }
  return s.str();
}

} // namespace radmode
