// Error estimate of the truncation by total excitation number (space::Layout restricted to ≤ K
// excitations). H_eff feeds amplitude from the kept states into the first excluded shell (K + 1
// excitations); the restricted evolution drops it. In the weak-drive regime that shell follows
// the kept amplitudes adiabatically (its states all decay, at ≥ min(κ, Γ/2)), so its amplitude is
//   c_out ≈ −(H_eff,out)⁻¹ · H_out←kept · ψ,
// the first-order adiabatic elimination of the shell; ‖c_out‖²/‖ψ‖² is the *leaked norm* the
// integrator reports (its maximum over the sampled times). It is an estimate, not a bound: it
// neglects the shells above K + 1 (higher order in the drive) and the non-adiabatic transient
// right after a jump or an attach.
#pragma once

#include <Eigen/SparseLU>
#include <memory>
#include <optional>

#include "engine/space/layout.h"
#include "engine/trajectory/model.h"

namespace flyby::trajectory {

class ExcitationLeak {
 public:
  // For a `layout` restricted by excitation number (otherwise: returns nothing). Coefficients with a time
  // function are evaluated when population() is called; controls are fixed for the stretch.
  static std::unique_ptr<ExcitationLeak> build(const Model& model, const space::Layout& layout,
                                               const std::vector<Complex>& controls);
  // Point the time-dependent coefficients at `model`'s Hamiltonian terms, for a model whose
  // stretch signature (integrator.cpp: subsystem bases, active terms and channels with their
  // constants, controls and order of time functions, excitation limit) equals that of the model
  // this estimator was built from, so every matrix is the same and only the time functions
  // differ (the next atom of a beam). Returns false, changing nothing, when the estimator has
  // time-dependent channels or the number of time-dependent terms differs: build a new one.
  bool rebind(const Model& model, const space::Layout& layout);
  // Estimated population of the first excluded shell relative to ‖ψ‖², at time t_us.
  double population(const Vector& psi, double t_us) const;

 private:
  using Sparse = Eigen::SparseMatrix<Complex, Eigen::ColMajor>;
  Sparse feed_const_, out_const_;  // out ← kept, out ← out (H_eff)
  std::vector<std::pair<const operators::Coefficient*, std::pair<Sparse, Sparse>>> timed_;
  // Time-dependent channels: C = constant + Σ c_k(t) parts_k, each as (shell × shell, shell ← kept).
  struct TimedChannel {
    std::pair<Sparse, Sparse> constant;
    std::vector<std::pair<operators::Coefficient, std::pair<Sparse, Sparse>>> parts;
    Sparse select, select_t;  // out rows of the shell, and its transpose
  };
  std::vector<TimedChannel> timed_channels_;
  std::vector<Complex> controls_;
  std::shared_ptr<Eigen::SparseLU<Sparse>> lu_const_;  // factorized out block when nothing is time dependent
  // Time-dependent out block: its sparsity pattern is the same at every call (the union of the
  // terms' patterns), so the symbolic analysis (column ordering) is done once and each call only
  // factorizes — what SparseLU::compute does in two steps, hence the same bits. Mutable scratch
  // of population(): an estimator belongs to one stretch of one thread's workspace.
  mutable Eigen::SparseLU<Sparse> lu_timed_;
  mutable std::vector<int> lu_outer_, lu_inner_;  // pattern lu_timed_ was analyzed for
};

}  // namespace flyby::trajectory
