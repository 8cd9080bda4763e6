// Resonator: κ from finesse, g0 from the dipole element and mode volume, cooperativity, output
// channels and their completeness (models/resonator).
#include <catch2/catch.hpp>

#include "engine/common/errors.h"
#include <cmath>
#include <numbers>

#include "engine/common/constants.h"
#include "engine/common/units.h"
#include "models/resonator/resonator.h"

using namespace flyby::resonator;
using flyby::geometry::Complex;
using flyby::geometry::PolarizationKind;

namespace {
const double kPi = std::numbers::pi;
// Unit-weight dipole of 87Rb D2: ⟨J‖er‖J′⟩ √((2J+1)/(2J′+1)) = 4.22752 e a0 / √2
// (Steck, "Rubidium 87 D Line Data" [memory], value from shared/REFERENCES.md).
const double kRb87Dipole = 4.22752 * flyby::constants::e_C * flyby::constants::a0_m / std::sqrt(2.0);
const double kRb87Lambda_nm = 780.241209686;  // Steck [memory], REFERENCES.md
}  // namespace

TEST_CASE("g0 from the dipole element and the mode volume", "[scenario][resonator]") {
  // Independent value: tests/reference/scenario_g0.py (numpy + scipy.constants, CODATA 2018):
  // g0/2π = 7.714531095 MHz for L = 0.5 mm, w0 = 30 µm, standing wave, V = π w0² L / 4.
  const double V = mode_volume_um3(30.0, 0.5, true);
  CHECK(std::abs(V - kPi * 900.0 * 500.0 / 4.0) < 1e-9 * V);
  const double g0 = flyby::units::MHz_from_angular(g0_rad_per_us(kRb87Dipole, kRb87Lambda_nm, V));
  REQUIRE(std::isfinite(g0));
  CHECK(std::abs(g0 - 7.714531095) < 1e-8 * 7.7);
  // The same d gives τ = 1/Γ = 26.235 ns (REFERENCES.md [derived]); unit_weight_dipole inverts it.
  const double gamma = 1.0 / 26.234855e-3;  // rad/µs from the python script's τ
  CHECK(std::abs(unit_weight_dipole_C_m(gamma, kRb87Lambda_nm) / kRb87Dipole - 1.0) < 1e-6);
  // Running wave: half the mode-volume factor → g0 smaller by √2.
  const double g_run = g0_rad_per_us(kRb87Dipole, kRb87Lambda_nm, mode_volume_um3(30.0, 0.5, false));
  CHECK(std::abs(flyby::units::MHz_from_angular(g_run) * std::sqrt(2.0) - g0) < 1e-9 * g0);
}

TEST_CASE("κ from finesse and the cooperativity closed form", "[scenario][resonator]") {
  // FWHM linewidth = FSR / F = c/(2LF); κ is the field decay, FWHM = 2κ/2π.
  ResonatorSpec s;
  s.length_mm = 0.5;
  s.waist_um = 30.0;
  s.finesse = 60000;
  const double gamma = 2 * kPi * 6.0666;
  const auto m = build_resonator(s, kRb87Lambda_nm, unit_weight_dipole_C_m(gamma, kRb87Lambda_nm));
  const double fwhm_MHz = flyby::constants::c_m_per_s / (2 * 0.5e-3 * 60000) * 1e-6;
  CHECK(std::abs(2 * flyby::units::MHz_from_angular(m.kappa_rad_per_us) - fwhm_MHz) < 1e-12 * fwhm_MHz);
  // With g0 and Γ from the same dipole: C1 = g0²/(κΓ) = 12 F/(π k² w0²) — equivalently
  // η = 4g²/(κ_FWHM·Γ) = 24F/(πk²w²) with κ_FWHM = 2κ (H. Tanji-Suzuki et al., Adv. At. Mol.
  // Opt. Phys. 60, 201 (2011)) [memory]; independent of d.
  const double k = 2 * kPi / (kRb87Lambda_nm * 1e-3);
  CHECK(std::abs(m.cooperativity(gamma) / (12 * 60000 / (kPi * k * k * 900.0)) - 1.0) < 1e-9);
}

TEST_CASE("output channels: analyzer projections and 2κ a†a completeness", "[scenario][resonator]") {
  ResonatorSpec s;
  s.length_mm = 1;
  s.waist_um = 40;
  s.kappa_MHz = 1.5;
  s.g0_MHz = 3;
  s.mode1_angle_deg = 0;
  s.output_mirror_fraction = 0.8;
  // Designated initializers: assigning literals to the members trips a GCC 12 false -Wrestrict.
  flyby::geometry::PolarizationSpec diag, anti;
  diag.linear_angle_deg = 45;
  anti.linear_angle_deg = -45;
  const OutputPort d{.channel = "D", .analyzer = "pbs", .polarization = diag, .efficiency = 0.5};
  const OutputPort a{.channel = "A", .analyzer = "pbs", .polarization = anti, .efficiency = 0.7};
  s.outputs.push_back(d);
  s.outputs.push_back(a);
  const auto m = build_resonator(s, 780, 1e-29);
  const double two_kappa = 2 * 2 * kPi * 1.5;
  // Diagonal port sees (a_x + a_y)/√2 with weight 2κ T η.
  CHECK(std::abs(m.channels[0].coefficients(0) - std::sqrt(two_kappa * 0.8 * 0.5 / 2)) < 1e-12);
  CHECK(std::abs(m.channels[0].coefficients(1) - std::sqrt(two_kappa * 0.8 * 0.5 / 2)) < 1e-12);
  CHECK(std::abs(m.channels[1].coefficients(1) + std::sqrt(two_kappa * 0.8 * 0.7 / 2)) < 1e-12);
  // Detected + undetected = 2κ Σ a†a.
  CHECK(flyby::geometry::completeness_error(m.channels, 2, two_kappa) < 1e-12 * two_kappa);
  int undetected = 0;
  for (const auto& c : m.channels) undetected += !c.detected;
  CHECK(undetected == 2);

  SECTION("circular and Jones bases are complete too") {
    s.outputs[0].polarization.kind = PolarizationKind::kSigmaPlus;
    s.outputs[1].polarization.kind = PolarizationKind::kJones;
    s.outputs[1].polarization.jones = {Complex(0, 1), Complex(1, 0)};  // ∝ (x̂ − iŷ): σ− about +ẑ
    s.output_mirror_fraction = 1.0;
    s.outputs[0].efficiency = s.outputs[1].efficiency = 1.0;
    const auto c = build_resonator(s, 780, 1e-29);
    CHECK(flyby::geometry::completeness_error(c.channels, 2, two_kappa) < 1e-12 * two_kappa);
    CHECK(c.channels.size() == 2);  // perfect detection: no undetected remainder left
  }
  SECTION("a non-orthogonal analyzer basis is refused") {
    s.outputs[1].polarization.linear_angle_deg = 30;
    CHECK_THROWS_WITH(build_resonator(s, 780, 1e-29), Catch::Contains("not orthogonal"));
  }
  SECTION("efficiency outside [0, 1] is refused") {
    s.outputs[0].efficiency = 1.2;
    CHECK_THROWS_AS(build_resonator(s, 780, 1e-29), flyby::InputError);
  }
}

TEST_CASE("mode function: Gaussian transverse profile and standing wave", "[scenario][resonator]") {
  ResonatorSpec s;
  s.length_mm = 1;
  s.waist_um = 20;
  s.kappa_MHz = 1;
  s.g0_MHz = 1;
  const auto m = build_resonator(s, 800, 1e-29);
  using flyby::geometry::Vec3;
  // At ρ = w0 the field is 1/e of the axis value (1/e² intensity radius).
  CHECK(std::abs(std::abs(m.mode_function(Vec3(20, 0, 0))) - std::exp(-1.0)) < 1e-12);
  // Node a quarter wavelength from the antinode at z = 0.
  CHECK(std::abs(m.mode_function(Vec3(0, 0, 0.2))) < 1e-12);
  CHECK(std::abs(m.mode_function(Vec3(0, 0, 0.4)) + 1.0) < 1e-12);
}
