// Unit conventions of the engine (shared/DESIGN.md §3): internal time unit µs, angular
// frequencies in rad/µs. Config inputs give frequencies as ω/2π in MHz; these helpers are the
// only place the factor 2π enters.
#pragma once

#include "engine/common/constants.h"

namespace flyby::units {

// ω/2π in MHz  ->  ω in rad/µs.
inline constexpr double angular_from_MHz(double f_MHz) { return 2.0 * constants::kPi * f_MHz; }
// ω in rad/µs  ->  ω/2π in MHz.
inline constexpr double MHz_from_angular(double w_rad_per_us) { return w_rad_per_us / (2.0 * constants::kPi); }

inline constexpr double us_from_ns(double t_ns) { return t_ns * 1e-3; }
inline constexpr double us_from_s(double t_s) { return t_s * 1e6; }
inline constexpr double ps_from_us(double t_us) { return t_us * 1e6; }

}  // namespace flyby::units
