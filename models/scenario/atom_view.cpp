// Per-atom couplings along the path (see atom_view.h).
#include "models/scenario/atom_view.h"

#include "engine/common/units.h"

namespace flyby::scenario {

std::vector<double> reference_frame_energies_rad_per_us(const config::CheckedScenario& s) {
  return config::reference_frame_energies(s.levels, s.config.atom.reference_ground_2F,
                                          s.config.atom.reference_excited_2F);
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

double AtomView::field_along_axis_G(double t) const {
  const double b0 = s_->frame.field_magnitude_G();
  if (!s_->config.field.gradient_G_per_mm) return b0;
  const Vec3 r_mm = position_um(t) * 1e-3;
  return b0 + s_->frame.axis_lab().dot(*s_->config.field.gradient_G_per_mm * r_mm);
}

std::vector<double> AtomView::energies_at_rad_per_us(double t) const {
  if (!s_->config.field.gradient_G_per_mm) return energies_;
  const double ratio = field_along_axis_G(t) / s_->frame.field_magnitude_G();
  std::vector<double> e(energies_.size());
  const auto& e0 = s_->energies_zero_field_rad_per_us;
  for (std::size_t i = 0; i < e.size(); ++i) e[i] = e0[i] + (energies_[i] - e0[i]) * ratio;
  return e;
}

Complex AtomView::resonator_coupling(double t) const {
  if (!s_->resonator) return 0.0;
  return s_->resonator->g0_rad_per_us * s_->resonator->mode_function(position_um(t));
}

double AtomView::drive_rabi_rad_per_us(int j, double t) const {
  return s_->side_drive_rabi_rad_per_us[j] * drives::envelope(s_->config.side_drives[j], position_um(t));
}

}  // namespace flyby::scenario
