// The current tensor-product layout of one trajectory's state: which subsystems are present and
// in which order. Basis index = Σ_k i_k · stride_k with the last-attached subsystem fastest
// (stride 1), so attaching appends a factor (ψ ⊗ φ) without reordering the existing amplitudes.
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

  const std::vector<SubsystemId>& present() const { return present_; }
  bool contains(SubsystemId id) const { return position(id).has_value(); }
  // Position of `id` in tensor order, if present.
  std::optional<int> position(SubsystemId id) const;
  // Dimension and stride of a present subsystem.
  int dimension_of(SubsystemId id) const;
  long stride_of(SubsystemId id) const;
  long dimension() const { return total_; }

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
  const std::vector<Subsystem>* all_ = nullptr;
  std::vector<SubsystemId> present_;
  std::vector<long> strides_;
  long total_ = 1;
};

}  // namespace flyby::space
