// Side drives and resonator drives: Rabi frequency from intensity, Doppler shift, and the
// transit-time broadening an atom crossing the Gaussian beam sees (models/drives).
#include <catch2/catch.hpp>

#include "engine/common/errors.h"
#include <cmath>
#include <numbers>

#include "engine/common/constants.h"
#include "engine/common/units.h"
#include "models/drives/resonator_drive.h"
#include "models/drives/side_drive.h"
#include "models/resonator/resonator.h"

using namespace flyby::drives;
using flyby::geometry::Vec3;

namespace {
const double kPi = std::numbers::pi;
const double kRb87Dipole = 4.22752 * flyby::constants::e_C * flyby::constants::a0_m / std::sqrt(2.0);

// |∫ f(t) e^{iωt} dt|² by the trapezoid rule on a grid that covers ±8 τ.
double power(const std::vector<double>& f, double dt, double omega) {
  std::complex<double> s = 0;
  for (std::size_t i = 0; i < f.size(); ++i) s += f[i] * std::exp(std::complex<double>(0, omega * i * dt));
  return std::norm(s * dt);
}
}  // namespace

TEST_CASE("Rabi frequency from intensity via the unit-weight saturation intensity", "[scenario][drives]") {
  const double gamma = 1.0 / 26.234855e-3;  // 87Rb D2, τ from tests/reference/scenario_g0.py
  // tests/reference/scenario_g0.py: I_sat = 1.669321663 mW/cm² (Steck quotes 1.669 mW/cm² for the
  // cycling transition [memory]).
  const double isat = saturation_intensity_mW_per_cm2(gamma, kRb87Dipole);
  CHECK(std::abs(isat - 1.669321663) < 1e-6);
  // Ω² = Γ² I / (2 I_sat) (Steck, D-line notes, eq. for the saturation parameter) [memory].
  for (double I : {0.1, 1.669321663, 25.0}) {
    const double om = rabi_from_intensity_rad_per_us(I, kRb87Dipole);
    CHECK(std::abs(om * om / (gamma * gamma * I / (2 * isat)) - 1.0) < 1e-6);
  }
  SideDrive d;
  d.name = "x";
  d.waist_um = 10;
  CHECK_THROWS_AS(peak_rabi_rad_per_us(d, kRb87Dipole), flyby::InputError);  // neither given
  d.rabi_MHz = -1;
  CHECK_THROWS_AS(peak_rabi_rad_per_us(d, kRb87Dipole), flyby::InputError);  // negative
}

TEST_CASE("Doppler shift −k·v", "[scenario][drives]") {
  SideDrive d;
  d.direction = Vec3(0, 1, 0);
  // Atom running into the beam (v antiparallel to k) sees the laser blue-shifted by v/λ.
  const double shift = doppler_shift_rad_per_us(d, Vec3(0, -300, 0), 780.0);
  CHECK(std::abs(flyby::units::MHz_from_angular(shift) - 300.0 / 780e-9 * 1e-6) < 1e-9);
  // Motion perpendicular to k: no first-order shift.
  CHECK(doppler_shift_rad_per_us(d, Vec3(400, 0, 0), 780.0) == 0.0);
}

TEST_CASE("transit-time broadening of a side drive seen by a moving atom", "[scenario][drives]") {
  // Demtröder, "Laser Spectroscopy", transit-time broadening [memory]: an atom crossing a
  // Gaussian beam of 1/e² intensity radius w at speed v sees a spectrum of FWHM δν ≈ 0.3748 v/w
  // (= √(2 ln 2)/π · v/w). Here the drive envelope the atom actually sees is sampled from the
  // drive model along its straight path and Fourier transformed numerically.
  SideDrive d;
  d.direction = Vec3(0, 1, 0);
  d.focus_um = Vec3(0, 0, 5);  // the beam axis is offset along z: the envelope then has a constant factor
  d.waist_um = 50;
  for (double v : {150.0, 400.0}) {
    const double tau = d.waist_um / v;  // µs
    const double dt = tau / 200;
    std::vector<double> f;
    for (double t = -8 * tau; t <= 8 * tau; t += dt) f.push_back(envelope(d, Vec3(v * t, 0, 0)));
    const double p0 = power(f, dt, 0.0);
    // Half maximum by bisection in ω.
    double lo = 0, hi = 10 / tau;
    for (int it = 0; it < 80; ++it) {
      const double mid = 0.5 * (lo + hi);
      (power(f, dt, mid) > 0.5 * p0 ? lo : hi) = mid;
    }
    const double fwhm_MHz = 2 * lo / (2 * kPi);
    REQUIRE(std::isfinite(fwhm_MHz));
    const double expected_MHz = 0.3748 * v / d.waist_um;  // v/w in 1/µs = MHz
    // 0.3748 is quoted to 4 digits (exact √(2 ln 2)/π = 0.374754…).
    CHECK(std::abs(fwhm_MHz / expected_MHz - 1.0) < 2e-4);
  }
}

TEST_CASE("resonator drive amplitude from the empty-resonator photon number", "[scenario][drives]") {
  ResonatorDrive d;
  d.name = "probe";
  d.empty_mean_photons = 0.04;
  const double kappa = 2 * kPi * 3.0;
  // Empty resonator on resonance: ⟨a⟩ = −iE/κ, n̄ = (E/κ)² (steady state of da/dt = −κa − iE).
  CHECK(std::abs(amplitude_rad_per_us(d, kappa) - 0.2 * kappa) < 1e-12);
  d.amplitude_MHz = 0.1;
  CHECK_THROWS_AS(amplitude_rad_per_us(d, kappa), flyby::InputError);  // both given
}
