// The current tensor-product layout of one trajectory's state: which subsystems are present and
// in which order. Basis index = Σ_k i_k · stride_k with the last-attached subsystem fastest
// (stride 1), so attaching appends a factor (ψ ⊗ φ) without reordering the existing amplitudes.
//
// Optionally the layout is *restricted*: by total excitation number (only the product states whose
// excitation numbers, Subsystem::excitation_of, sum to at most K are kept) and/or by pruned
// levels (Subsystem::allowed; product states with a pruned level are left out). Then a state vector
// holds one amplitude per kept state, in increasing order of the full index above, and
// dimension() is the number of kept states; attach and detach map between restricted bases
// (an attached factor's amplitudes that would exceed K are dropped and the state rescaled to its
// previous norm; the dropped fraction is reported). Operators assemble on the kept states
// (operators::to_sparse). This is the weak-drive truncation of docs/engine.md.
#pragma once

#include <Eigen/Dense>
#include <complex>
#include <optional>
#include <vector>

#include "engine/common/random.h"
#include "engine/space/subsystem.h"

namespace flyby::space {

using Vector = Eigen::VectorXcd;

class Layout {
 public:
  Layout() = default;
  // `all` is the model's list of subsystems (indexed by SubsystemId); `present` the ids present,
  // in tensor order.
  Layout(const std::vector<Subsystem>* all, std::vector<SubsystemId> present);
  // Restricted to total excitation number ≤ max_excitation (unset: the full tensor product).
  Layout(const std::vector<Subsystem>* all, std::vector<SubsystemId> present, std::optional<int> max_excitation);

  const std::vector<SubsystemId>& present() const { return present_; }
  bool contains(SubsystemId id) const { return position(id).has_value(); }
  // Position of `id` in tensor order, if present.
  std::optional<int> position(SubsystemId id) const;
  // Dimension and stride of a present subsystem.
  int dimension_of(SubsystemId id) const;
  long stride_of(SubsystemId id) const;
  // Number of amplitudes of a state vector (kept states when restricted).
  long dimension() const { return restricted_ ? long(kept_.size()) : total_; }
  // Size of the full tensor product of the present subsystems.
  long full_dimension() const { return total_; }

  // Excitation-number restriction (see the file comment).
  bool restricted() const { return restricted_; }
  std::optional<int> max_excitation() const { return max_excitation_; }
  // Full indices of the kept states, increasing (empty when not restricted).
  const std::vector<long>& kept() const { return kept_; }
  // Full index of vector position i, and the vector position of a full index (unset: not kept).
  long full_index(long i) const { return restricted_ ? kept_[std::size_t(i)] : i; }
  std::optional<long> index_of_full(long full) const;
  // Total excitation number of the full basis state `full`.
  int excitation_of_full(long full) const;
  // Norm fraction dropped by the last attach because it exceeded the restriction (0 if none).
  double last_attach_dropped_fraction() const { return last_dropped_; }

  // ψ ⊗ φ: append subsystem `id` in the normalized local state `phi`.
  Vector attach(SubsystemId id, const Vector& psi, const Vector& phi);
  // Measure subsystem `id` in its basis with Born probabilities (from ψ/‖ψ‖), remove it, and
  // return the reduced state rescaled to the norm ψ had (so a waiting-time threshold stays
  // valid). `outcome` receives the measured basis index.
  Vector detach(SubsystemId id, const Vector& psi, Rng& rng, int& outcome);

  // Population of local basis state `level` of subsystem `id` in ψ (unnormalized sum |ψ_i|²).
  double local_population(SubsystemId id, int level, const Vector& psi) const;

 private:
  void recompute();
  // Local basis index of the subsystem at tensor position p in full state `full`.
  int local_index(long full, int p) const { return int((full / strides_[p]) % (*all_)[present_[p]].dimension); }
  const std::vector<Subsystem>* all_ = nullptr;
  std::vector<SubsystemId> present_;
  std::vector<long> strides_;
  long total_ = 1;
  std::optional<int> max_excitation_;
  bool restricted_ = false;
  std::vector<long> kept_;
  double last_dropped_ = 0.0;
};

}  // namespace flyby::space
