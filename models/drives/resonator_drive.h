// Coherent drive of one resonator mode: H = ħ E (a_i + a_i†) in the frame of the drive laser.
//
// Amplitude E is given directly (E/2π in MHz) or by the mean photon number n̄ the empty resonator
// would hold with the drive on resonance, n̄ = (E/κ)², so E = κ √n̄.
#pragma once

#include <optional>
#include <string>

namespace flyby::drives {

struct ResonatorDrive {
  std::string name;                            // unique name (feedback rules refer to it)
  int mode = 0;                                // 0 = mode 1, 1 = mode 2 of the resonator
  std::optional<double> amplitude_MHz;         // E/2π, MHz, ≥ 0; or ...
  std::optional<double> empty_mean_photons;    // ... n̄ of the empty resonator on resonance, ≥ 0
  double detuning_MHz = 0.0;                   // ν_L − ν_ref, MHz
};

// E in rad/µs. Throws flyby::InputError unless exactly one amplitude form is given and ≥ 0.
double amplitude_rad_per_us(const ResonatorDrive& drive, double kappa_rad_per_us);

}  // namespace flyby::drives
