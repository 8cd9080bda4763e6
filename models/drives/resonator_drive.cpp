// Resonator drive amplitude (see resonator_drive.h).
#include "models/drives/resonator_drive.h"

#include <cmath>

#include "engine/common/errors.h"
#include "engine/common/units.h"

namespace flyby::drives {

double amplitude_rad_per_us(const ResonatorDrive& d, double kappa) {
  if (d.amplitude_MHz.has_value() == d.empty_mean_photons.has_value()) {
    throw InputError("drive " + d.name + ": give exactly one of amplitude_MHz and empty_mean_photons_count");
  }
  if (d.mode != 0 && d.mode != 1) throw InputError("drive " + d.name + ": mode must be 1 or 2");
  if (d.amplitude_MHz) {
    if (!(std::isfinite(*d.amplitude_MHz) && *d.amplitude_MHz >= 0.0)) throw InputError("drive " + d.name + ": amplitude must be ≥ 0");
    return units::angular_from_MHz(*d.amplitude_MHz);
  }
  if (!(std::isfinite(*d.empty_mean_photons) && *d.empty_mean_photons >= 0.0)) {
    throw InputError("drive " + d.name + ": mean photon number must be ≥ 0");
  }
  return kappa * std::sqrt(*d.empty_mean_photons);
}

}  // namespace flyby::drives
