// Side-laser drive model (see side_drive.h).
#include "models/drives/side_drive.h"

#include <cmath>
#include <numbers>

#include "engine/common/constants.h"
#include "engine/common/errors.h"
#include "engine/common/units.h"

namespace flyby::drives {

namespace c = flyby::constants;

double rabi_from_intensity_rad_per_us(double intensity_mW_per_cm2, double dipole_C_m) {
  const double intensity_W_per_m2 = intensity_mW_per_cm2 * 10.0;  // 1 mW/cm² = 10 W/m²
  const double e0 = std::sqrt(2.0 * intensity_W_per_m2 / (c::c_m_per_s * c::eps0_F_per_m));
  return dipole_C_m * e0 / c::hbar_J_s * 1e-6;
}

double saturation_intensity_mW_per_cm2(double gamma_rad_per_us, double dipole_C_m) {
  const double g = gamma_rad_per_us * 1e6;
  const double isat_W_per_m2 = c::c_m_per_s * c::eps0_F_per_m * g * g * c::hbar_J_s * c::hbar_J_s / (4.0 * dipole_C_m * dipole_C_m);
  return isat_W_per_m2 / 10.0;
}

double peak_rabi_rad_per_us(const SideDrive& d, double dipole_C_m) {
  if (d.rabi_MHz.has_value() == d.intensity_mW_per_cm2.has_value()) {
    throw InputError("drive " + d.name + ": give exactly one of rabi_MHz and intensity_mW_per_cm2");
  }
  if (d.rabi_MHz) {
    if (!(std::isfinite(*d.rabi_MHz) && *d.rabi_MHz >= 0.0)) throw InputError("drive " + d.name + ": Rabi frequency must be ≥ 0");
    return units::angular_from_MHz(*d.rabi_MHz);
  }
  if (!(std::isfinite(*d.intensity_mW_per_cm2) && *d.intensity_mW_per_cm2 >= 0.0)) {
    throw InputError("drive " + d.name + ": intensity must be ≥ 0");
  }
  return rabi_from_intensity_rad_per_us(*d.intensity_mW_per_cm2, dipole_C_m);
}

double envelope(const SideDrive& d, const Vec3& r) {
  const Vec3 k = d.direction.normalized();
  const Vec3 rel = r - d.focus_um;
  const Vec3 perp = rel - rel.dot(k) * k;
  return std::exp(-perp.squaredNorm() / (d.waist_um * d.waist_um));
}

double doppler_shift_rad_per_us(const SideDrive& d, const Vec3& v, double wavelength_nm) {
  const double k = 2.0 * std::numbers::pi / (wavelength_nm * 1e-3);  // rad/µm
  return -k * d.direction.normalized().dot(v);                      // µm/µs · rad/µm
}

void validate(const SideDrive& d) {
  if (!(d.direction.norm() > 0.0) || !d.direction.allFinite()) throw InputError("drive " + d.name + ": direction has zero length");
  if (!(std::isfinite(d.waist_um) && d.waist_um > 0.0)) throw InputError("drive " + d.name + ": waist must be > 0");
  if (!std::isfinite(d.detuning_MHz)) throw InputError("drive " + d.name + ": detuning is not finite");
  try {
    (void)geometry::polarization_vector(d.polarization, d.direction);
  } catch (const InputError& e) {
    throw InputError("drive " + d.name + ": " + e.what());
  }
}

}  // namespace flyby::drives
