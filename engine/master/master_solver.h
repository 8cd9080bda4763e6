// Reference master-equation solver for a trajectory Model: the same Hamiltonian, channels,
// controls and fixed event schedule (attach: ρ ⊗ |φ⟩⟨φ|, detach: partial trace; the jump hook
// is not used — feedback is conditional and has no master-equation counterpart). Used by the
// validation tests and available where the density matrix is cheaper than trajectories.
// Two-time correlations by the quantum regression theorem (Lax; e.g. Carmichael, "Statistical
// Methods in Quantum Optics 1", ch. 1): ⟨B(t+τ) ... ⟩ = Tr[B e^{Lτ}(A ρ A†)].
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "engine/master/liouvillian.h"
#include "engine/trajectory/model.h"

namespace flyby::master {

struct Options {
  // Dormand–Prince 5(4) on vec(ρ): accept when |err| ≤ atol + rtol·|x| per component.
  double rtol = 1e-10;  // relative tolerance, (0, 0.1]
  double atol = 1e-12;  // absolute tolerance on density-matrix elements, > 0
  std::optional<double> max_step_us;  // largest step, µs; unset = unlimited
};

struct EvolveResult {
  std::vector<double> times_us;
  // expectations[k][j] = Tr[O_j ρ(t_k)] (terms on absent subsystems are inactive).
  std::vector<std::vector<Complex>> expectations;
  std::vector<Dense> rho;              // ρ(t_k) in the layout present at t_k
  std::vector<std::vector<space::SubsystemId>> present;  // that layout
};

class MasterSolver {
 public:
  explicit MasterSolver(const trajectory::Model& model, Options options = {});

  // ρ at the sorted `times_us` (within [start, end]), from the model's initial product state
  // through its events. Events at a sample time act after the sample.
  EvolveResult evolve(const std::vector<double>& times_us, const std::vector<operators::Operator>& observables) const;

  // Layout and matrices of the initial configuration (controls at their initial values).
  space::Layout initial_layout() const;
  SparseMatrix hamiltonian(double t_us) const;           // on the initial layout
  std::vector<SparseMatrix> collapse_operators() const;   // on the initial layout, model order
  SparseCol liouvillian(double t_us) const;               // on the initial layout
  Dense matrix(const operators::Operator& op) const;      // on the initial layout

  // Steady state of the initial configuration (requires a time-independent H).
  Dense steady_state() const;
  // G(τ_k) = Tr[B e^{Lτ_k}(A ρ A†)] with the Liouvillian of the initial configuration at `t_us`
  // (time-independent H). For g2 of channels a, b: A = C_a, B = C_b†C_b, divide by the rates.
  std::vector<Complex> correlation(const Dense& rho, const operators::Operator& a, const operators::Operator& b,
                                   const std::vector<double>& taus_us) const;
  // Normalized stationary cross-correlation g2_ab(τ) between channels (by index) at the steady
  // state: Tr[C_b†C_b e^{Lτ}(C_a ρ C_a†)] / (Tr[C_a†C_a ρ] Tr[C_b†C_b ρ]).
  std::vector<double> g2(int channel_a, int channel_b, const std::vector<double>& taus_us) const;
  // Stationary rate Tr[C†C ρ_ss] of a channel, 1/µs.
  double rate(int channel) const;

 private:
  const trajectory::Model& model_;
  Options options_;
};

// Propagate vec(ρ) with dx/dt = l·x to each of the sorted times (first time ≥ t0).
std::vector<Eigen::VectorXcd> propagate(const SparseCol& l, const Eigen::VectorXcd& x0, double t0,
                                        const std::vector<double>& times, const Options& options);

}  // namespace flyby::master
