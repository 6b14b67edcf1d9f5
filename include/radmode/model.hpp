#pragma once
// StellarModel: the equilibrium structure every stage works on, as plain arrays in cgs.
//
// Invariants established by the reader (model_io.hpp) and by validate_model():
//  - points run centre-first: r is non-decreasing; r[0] >= 0; r.back() = R is the surface;
//    a radius may repeat once (composition discontinuity: two rows with the same r);
//  - m is non-decreasing with m.back() = M; P >= 0; rho > 0; gamma1 > 0; all finite;
//    except that rho = 0 is allowed at the last point when P = 0 there too (the exact
//    surface of a polytrope of index n > 0, as the generators write it);
//  - at least min_points points.
// Optional columns are empty vectors when the table did not provide them.

#include <cstddef>
#include <string>
#include <utility>
#include <vector>

namespace radmode {

struct StellarModel {
  // Required quantities, one entry per point, centre first.
  std::vector<double> r;      ///< radius [cm]
  std::vector<double> m;      ///< mass inside r [g]
  std::vector<double> P;      ///< pressure [dyn cm^-2]
  std::vector<double> rho;    ///< density [g cm^-3]
  std::vector<double> gamma1; ///< first adiabatic exponent (dimensionless)

  // Optional quantities (empty when absent).
  std::vector<double> T;        ///< temperature [K]
  std::vector<double> L;        ///< luminosity [erg s^-1]
  std::vector<double> nabla_ad; ///< adiabatic temperature gradient (dimensionless)
  std::vector<double> u;        ///< specific internal energy [erg g^-1]

  /// Other columns found in the table: kept (and written back) but not used.
  std::vector<std::pair<std::string, std::vector<double>>> extra;

  /// `# key = value` metadata lines in file order; passed through to every output.
  std::vector<std::pair<std::string, std::string>> metadata;

  /// 1-based line number in the source file of each point (empty for generated models);
  /// lets later checks name the offending line.
  std::vector<std::size_t> line;

  /// Where the model came from: a file path, or a description for generated models.
  std::string source;

  static constexpr std::size_t min_points = 10;

  std::size_t size() const noexcept { return r.size(); }
  double mass() const { return m.back(); }             ///< total mass M [g]
  double radius() const { return r.back(); }           ///< surface radius R [cm]
  double surface_pressure() const { return P.back(); } ///< P_s [dyn cm^-2]
  bool has_centre() const { return !r.empty() && r.front() == 0.0; }

  /// Value of a metadata key, or an empty string when absent.
  std::string meta(const std::string& key) const;
};

/// Checks every invariant above; throws InputError (kind per failure class, location from
/// `line` when known) naming the point, the column and what was expected.
void validate_model(const StellarModel& model);

} // namespace radmode
