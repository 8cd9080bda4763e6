// One atom's view of the scenario: the time-dependent couplings and drives it sees along its
// straight path, with every vector already in the quantization frame. This is the per-atom input
// of the engine's scenario assembly (issue 4 item 7); it holds no engine types.
//
// Conventions (docs/scenario.md):
//  * Reference frame: energies are angular frequencies (rad/µs) with the reference ground level
//    (atom.reference_ground_F) at zero hyperfine shift and the excited manifold shifted down by
//    the reference optical frequency, so the reference transition at B = 0 has zero energy
//    difference. A field at detuning Δ (from the reference transition) in a frame rotating at its
//    own frequency adds −Δ to every excited energy.
//  * Resonator: H = ħ g(t) Σ_i Σ_q (w_iq A_q† a_i + h.c.), g(t) = g0 ψ(r(t)) (complex for the
//    running wave), w_iq = mode_weights()[i][q+1].
//  * Side drive j: H = ħ (Ω_j(t)/2) Σ_q (w_jq A_q† + h.c.), Ω_j(t) = Ω_j exp(−ρ_j(t)²/w_j²), seen
//    at detuning Δ_j − k_j·v (Doppler). Feedback scales Ω_j(t) by the rule's level.
#pragma once

#include <vector>

#include "models/config/scenario_config.h"

namespace flyby::scenario {

using geometry::Complex;
using geometry::SphericalWeights;
using geometry::Vec3;

class AtomView {
 public:
  AtomView(const config::CheckedScenario& scenario, const source::Arrival& atom);

  Vec3 position_um(double t_us) const;

  // g0 ψ(r(t)) in rad/µs; 0 when there is no resonator.
  Complex resonator_coupling(double t_us) const;
  // w_iq for mode i (row) and q + 1 (column).
  const std::array<SphericalWeights, 2>& mode_weights() const { return mode_weights_; }

  int side_drive_count() const { return static_cast<int>(drive_weights_.size()); }
  double drive_rabi_rad_per_us(int j, double t_us) const;        // Ω_j(t), unit CG weight
  const SphericalWeights& drive_weights(int j) const { return drive_weights_[j]; }
  double drive_detuning_rad_per_us(int j) const { return drive_detuning_[j]; }  // Δ_j − k_j·v

  // Sublevel energies in the reference frame (see the file comment), basis order of the levels,
  // at the uniform field |B|.
  const std::vector<double>& energies_rad_per_us() const { return energies_; }

  // With a field gradient: the field along the (fixed) quantization axis at the atom,
  // B∥(t) = |B| + B̂·(G r(t)), and the energies with every Zeeman shift scaled by B∥/|B|
  // (exact for linear Zeeman shifts; first order in the field change for Breit–Rabi). The axis
  // does not follow the local field direction: valid while |G r| ≪ |B| over the atom's path.
  double field_along_axis_G(double t_us) const;
  std::vector<double> energies_at_rad_per_us(double t_us) const;

 private:
  const config::CheckedScenario* s_;
  source::Arrival atom_;
  std::array<SphericalWeights, 2> mode_weights_{};
  std::vector<SphericalWeights> drive_weights_;
  std::vector<double> drive_detuning_;
  std::vector<double> energies_;
};

// Energies of all sublevels in the reference frame (independent of the atom's motion).
std::vector<double> reference_frame_energies_rad_per_us(const config::CheckedScenario& scenario);

}  // namespace flyby::scenario
