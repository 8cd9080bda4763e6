// Resonator model: κ, g0, mode function and output channels (see resonator.h).
#include "models/resonator/resonator.h"

#include <cmath>
#include <map>
#include <numbers>
#include <sstream>

#include "engine/common/constants.h"
#include "engine/common/errors.h"
#include "engine/common/units.h"

namespace flyby::resonator {

namespace c = flyby::constants;

double kappa_from_finesse_rad_per_us(double finesse, double length_mm) {
  const double kappa_per_s = std::numbers::pi * c::c_m_per_s / (2.0 * length_mm * 1e-3 * finesse);
  return kappa_per_s * 1e-6;
}

double mode_volume_um3(double waist_um, double length_mm, bool standing_wave) {
  const double v = std::numbers::pi * waist_um * waist_um * (length_mm * 1e3);
  return standing_wave ? v / 4.0 : v / 2.0;
}

double g0_rad_per_us(double dipole_C_m, double wavelength_nm, double volume_um3) {
  const double omega_per_s = 2.0 * std::numbers::pi * c::c_m_per_s / (wavelength_nm * 1e-9);
  const double v_m3 = volume_um3 * 1e-18;
  const double g_per_s = dipole_C_m * std::sqrt(omega_per_s / (2.0 * c::hbar_J_s * c::eps0_F_per_m * v_m3));
  return g_per_s * 1e-6;
}

double unit_weight_dipole_C_m(double gamma_rad_per_us, double wavelength_nm) {
  const double omega = 2.0 * std::numbers::pi * c::c_m_per_s / (wavelength_nm * 1e-9);
  const double gamma_per_s = gamma_rad_per_us * 1e6;
  return std::sqrt(3.0 * std::numbers::pi * c::eps0_F_per_m * c::hbar_J_s * std::pow(c::c_m_per_s, 3) *
                   gamma_per_s / std::pow(omega, 3));
}

Complex ResonatorModel::mode_function(const Vec3& r) const {
  const double env = transverse_envelope(r);
  if (standing_wave) return env * std::cos(k_rad_per_um * r.z());
  return env * std::exp(Complex(0.0, k_rad_per_um * r.z()));
}

double ResonatorModel::transverse_envelope(const Vec3& r) const {
  return std::exp(-(r.x() * r.x() + r.y() * r.y()) / (waist_um * waist_um));
}

std::array<geometry::SphericalWeights, 2> ResonatorModel::mode_weights(const geometry::QuantizationFrame& frame) const {
  return {geometry::spherical_weights(frame.to_frame(CVec3(polarization_lab[0].cast<Complex>()))),
          geometry::spherical_weights(frame.to_frame(CVec3(polarization_lab[1].cast<Complex>())))};
}

double ResonatorModel::cooperativity(double gamma) const { return g0_rad_per_us * g0_rad_per_us / (kappa_rad_per_us * gamma); }

namespace {
void require(bool ok, const std::string& msg) {
  if (!ok) throw InputError(msg);
}
}  // namespace

ResonatorModel build_resonator(const ResonatorSpec& s, double wavelength_nm, double dipole_C_m) {
  require(std::isfinite(s.length_mm) && s.length_mm > 0.0, "resonator length must be > 0");
  require(std::isfinite(s.waist_um) && s.waist_um > 0.0, "resonator waist must be > 0");
  require(s.kappa_MHz.has_value() != s.finesse.has_value(), "give exactly one of resonator kappa and finesse");
  require(s.output_mirror_fraction >= 0.0 && s.output_mirror_fraction <= 1.0,
          "resonator output-mirror fraction must be in [0, 1]");
  require(s.fock_cutoff >= 1, "resonator Fock cutoff must be ≥ 1");
  require(wavelength_nm > 0.0, "wavelength must be > 0");

  ResonatorModel m;
  m.length_um = s.length_mm * 1e3;
  m.waist_um = s.waist_um;
  m.standing_wave = s.standing_wave;
  m.displaced_frame = s.displaced_frame;
  m.fock_cutoff = s.fock_cutoff;
  m.k_rad_per_um = 2.0 * std::numbers::pi / (wavelength_nm * 1e-3);
  if (s.kappa_MHz) {
    require(std::isfinite(*s.kappa_MHz) && *s.kappa_MHz > 0.0, "resonator kappa must be > 0");
    m.kappa_rad_per_us = units::angular_from_MHz(*s.kappa_MHz);
  } else {
    require(std::isfinite(*s.finesse) && *s.finesse > 0.0, "resonator finesse must be > 0");
    m.kappa_rad_per_us = kappa_from_finesse_rad_per_us(*s.finesse, s.length_mm);
  }
  m.mode_volume_um3 = mode_volume_um3(s.waist_um, s.length_mm, s.standing_wave);
  if (s.g0_MHz) {
    require(std::isfinite(*s.g0_MHz) && *s.g0_MHz > 0.0, "resonator g0 must be > 0");
    m.g0_rad_per_us = units::angular_from_MHz(*s.g0_MHz);
  } else {
    require(dipole_C_m > 0.0, "dipole moment must be > 0 to compute g0");
    m.g0_rad_per_us = g0_rad_per_us(dipole_C_m, wavelength_nm, m.mode_volume_um3);
  }
  const double phi = s.mode1_angle_deg * std::numbers::pi / 180.0;
  m.polarization_lab[0] = Vec3(std::cos(phi), std::sin(phi), 0.0);
  m.polarization_lab[1] = Vec3::UnitZ().cross(m.polarization_lab[0]);
  m.detuning_rad_per_us = {units::angular_from_MHz(s.detuning_MHz),
                           units::angular_from_MHz(s.detuning_MHz + s.splitting_MHz)};

  // Output ports: Jones vectors about +ẑ; orthogonality within each analyzer.
  const Vec3 k_out = Vec3::UnitZ();
  std::map<std::string, std::vector<std::pair<std::string, CVec3>>> analyzers;
  const double two_kappa = 2.0 * m.kappa_rad_per_us;
  for (const auto& port : s.outputs) {
    require(port.efficiency >= 0.0 && port.efficiency <= 1.0,
            "channel " + port.channel + ": efficiency must be in [0, 1]");
    const CVec3 j = geometry::polarization_vector(port.polarization, k_out);
    for (const auto& [other, jo] : analyzers[port.analyzer]) {
      const double ov = geometry::polarization_overlap(j, jo);
      if (ov > 1e-9) {
        std::ostringstream os;
        os << "analyzer '" << port.analyzer << "': ports " << other << " and " << port.channel
           << " are not orthogonal (|⟨a|b⟩|² = " << ov << "); a polarizing analyzer's outputs must be orthogonal";
        throw InputError(os.str());
      }
    }
    require(analyzers[port.analyzer].size() < 2, "analyzer '" + port.analyzer + "' has more than two ports");
    analyzers[port.analyzer].emplace_back(port.channel, j);
    geometry::LinearCollapse ch;
    ch.channel = port.channel;
    ch.detected = true;
    ch.coefficients.resize(2);
    const double amp = std::sqrt(two_kappa * s.output_mirror_fraction * port.efficiency);
    for (int i = 0; i < 2; ++i) ch.coefficients(i) = amp * j.dot(m.polarization_lab[i].cast<Complex>());
    m.channels.push_back(std::move(ch));
  }
  auto rest = geometry::undetected_remainder(m.channels, 2, two_kappa, "resonator_undetected", "resonator outputs");
  m.channels.insert(m.channels.end(), rest.begin(), rest.end());
  return m;
}

}  // namespace flyby::resonator
