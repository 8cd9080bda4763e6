// Accuracy and monitoring settings of the quantum-jump integrator (STYLE.md: Options in).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "engine/operators/operator.h"

namespace flyby::trajectory {

struct Options {
  // Adaptive stretches (time-dependent coefficients): Dormand–Prince 5(4) with dense output
  // (Boost.Odeint). A step is accepted when every real and imaginary amplitude component
  // satisfies |err| ≤ atol + rtol·|x|. Relative tolerance, dimensionless, in (0, 0.1].
  double rtol = 1e-8;
  // Absolute amplitude tolerance, in units of the state norm at the last renormalization
  // (the state is normalized after every jump), > 0.
  double atol = 1e-10;
  // Largest adaptive step, µs; unset = unlimited. Set it below the shortest feature of the time
  // functions (e.g. a pulse) that the integrator could otherwise step over.
  std::optional<double> max_step_us;
  // The jump time is located by bracketed root finding on ‖ψ(t)‖² = r to this accuracy, µs, > 0:
  // TOMS 748 on the dense output until the bracket is shorter than this (adaptive stretches), a
  // safeguarded Halley iteration on ln‖ψ‖² until its correction is below half of it or the
  // bracket shorter than it (exact stretches). Default 1e-7 µs = 0.1 ps, below a tagger's
  // resolution.
  double jump_time_tolerance_us = 1e-7;
  // Time-independent stretches use the exact exponential from an eigendecomposition of H_eff
  // when the eigenvector matrix has condition number ≤ this (near an exceptional point it does
  // not, and the stretch is integrated adaptively instead). ≥ 1.
  double max_eigenvector_condition = 1e8;
  // Use exact exponentials at all (false: every stretch adaptive; for tests and comparison).
  bool exact_exponential = true;
  // Largest state dimension for which the exact exponential is used (the decomposition costs
  // O(n³) per new stretch); larger stretches are integrated adaptively. ≥ 1.
  long max_exact_dimension = 600;
  // Fock truncation monitor: population of the top kept Fock state of any mode (max over the
  // trajectory, sampled at every step, jump and event). Above the warning level the summary
  // carries a warning; above the error level the trajectory stops with kFockCutoffExceeded.
  // Dimensionless, 0 < warning ≤ error ≤ 1.
  double fock_warning_population = 1e-3;
  double fock_error_population = 1e-2;
  // Name of the setting the user must raise, quoted in the Fock messages (the scenario layer
  // passes its config key, e.g. "resonator.fock_cutoff").
  std::string fock_cutoff_setting = "the Fock cutoff of the mode";
  // Expectation values ⟨O⟩ of the normalized state recorded at these times (sorted, µs, within
  // [start, end]); taken just before events at the same time.
  std::vector<double> sample_times_us;
  std::vector<operators::Operator> observables;
  // Safety limit on adaptive steps per trajectory, > 0.
  long max_steps = 100000000;

  // Empty when valid, else one line naming the offending field.
  std::optional<std::string> validate() const;
};

}  // namespace flyby::trajectory
