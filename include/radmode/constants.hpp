#pragma once
// Physical constants and unit conversions, all cgs.
// Sources: G from CODATA 2018; GM_sun and R_sun are the IAU 2015 Resolution B3 nominal values;
// M_sun is derived as GM_sun / G. c is exact (SI definition).

namespace radmode::constants {

inline constexpr double pi = 3.14159265358979323846;
inline constexpr double G = 6.67430e-8;             ///< cm^3 g^-1 s^-2 (CODATA 2018)
inline constexpr double GM_sun = 1.3271244e26;      ///< cm^3 s^-2 (IAU 2015 B3, nominal)
inline constexpr double R_sun = 6.957e10;           ///< cm (IAU 2015 B3, nominal)
inline constexpr double M_sun = GM_sun / G;         ///< g
inline constexpr double L_sun = 3.828e33;           ///< erg s^-1 (IAU 2015 B3, nominal)
inline constexpr double c_light = 2.99792458e10;    ///< cm s^-1 (exact)
inline constexpr double day_s = 86400.0;            ///< s
inline constexpr double hour_s = 3600.0;            ///< s
inline constexpr double atomic_mass_unit_g = 1.66053906660e-24; ///< g (CODATA 2018)
inline constexpr double boltzmann_k = 1.380649e-16; ///< erg K^-1 (exact)
inline constexpr double radiation_a = 7.5657332503e-15; ///< erg cm^-3 K^-4 (4 sigma / c, CODATA 2018 sigma)

} // namespace radmode::constants
