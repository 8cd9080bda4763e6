// Per-atom couplings along the path (see atom_view.h).
#include "models/scenario/atom_view.h"

#include "engine/common/units.h"

namespace flyby::scenario {

std::vector<double> reference_frame_energies_rad_per_us(const config::CheckedScenario& s) {
  double shift_g = 0.0, shift_e = 0.0;
  for (const auto& h : s.levels.hyperfine_levels()) {
    if (!h.excited && h.two_F == s.config.atom.reference_ground_2F) shift_g = h.hyperfine_shift_MHz;
    if (h.excited && h.two_F == s.config.atom.reference_excited_2F) shift_e = h.hyperfine_shift_MHz;
  }
  std::vector<double> e;
  for (const auto& sl : s.levels.sublevels()) {
    e.push_back(sl.energy_rad_per_us - units::angular_from_MHz(sl.excited ? shift_e : shift_g));
  }
  return e;
}

AtomView::AtomView(const config::CheckedScenario& s, const source::Arrival& atom) : s_(&s), atom_(atom) {
  if (s.resonator) mode_weights_ = s.resonator->mode_weights(s.frame);
  const double lambda_nm = s.levels.wavelength_nm();
  for (const auto& d : s.config.side_drives) {
    const geometry::CVec3 eps = geometry::polarization_vector(d.polarization, d.direction);
    drive_weights_.push_back(geometry::spherical_weights(s.frame.to_frame(eps)));
    drive_detuning_.push_back(units::angular_from_MHz(d.detuning_MHz) +
                              drives::doppler_shift_rad_per_us(d, atom.velocity_m_per_s, lambda_nm));
  }
  energies_ = reference_frame_energies_rad_per_us(s);
}

Vec3 AtomView::position_um(double t) const { return atom_.position_um + atom_.velocity_m_per_s * (t - atom_.t_ref_us); }

Complex AtomView::resonator_coupling(double t) const {
  if (!s_->resonator) return 0.0;
  return s_->resonator->g0_rad_per_us * s_->resonator->mode_function(position_um(t));
}

double AtomView::drive_rabi_rad_per_us(int j, double t) const {
  return s_->side_drive_rabi_rad_per_us[j] * drives::envelope(s_->config.side_drives[j], position_um(t));
}

}  // namespace flyby::scenario
