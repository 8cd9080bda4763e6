// Output of one quantum-jump trajectory: the jump record, detach measurements, sampled
// expectation values and a Summary (STYLE.md: Summary out).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "engine/operators/operator.h"
#include "engine/space/subsystem.h"

namespace flyby::trajectory {

struct JumpRecord {
  double time_us = 0.0;
  int channel = 0;  // index into Model::channels
  bool operator==(const JumpRecord&) const = default;
};

struct MeasurementRecord {
  double time_us = 0.0;
  space::SubsystemId subsystem = 0;
  int outcome = 0;  // basis index of the detached subsystem
  bool operator==(const MeasurementRecord&) const = default;
};

enum class Status {
  kSuccess,
  kFockCutoffExceeded,  // the top Fock population passed Options::fock_error_population
  kStepLimit,           // Options::max_steps reached
  kNumericalFailure,    // a non-finite state or a failed root bracket
};
const char* to_string(Status s);

struct Summary {
  Status status = Status::kSuccess;
  std::string message;                 // why the trajectory stopped early, or empty
  std::vector<std::string> warnings;   // e.g. Fock population above the warning level
  long jumps = 0;
  long adaptive_steps = 0;             // accepted Dormand–Prince steps
  long exponential_evaluations = 0;    // exact-propagator evaluations (bracketing + root finding)
  long exact_stretches = 0;            // stretches propagated with the exact exponential
  long adaptive_stretches = 0;         // stretches propagated adaptively
  long eigendecompositions = 0;        // new H_eff decompositions (cache misses)
  double norm_error_estimate = 0.0;    // max |‖ψ(t_jump)‖² − r| / r at the located jump times
  double top_fock_population_max = 0.0;
  double end_us = 0.0;                 // time reached
  // Excitation-number truncation (Model::max_excitation), when used: the largest estimated
  // population of the first excluded shell (trajectory/excitation_leak.h; at every jump and
  // stretch end, relative to ‖ψ‖²) and the largest norm fraction dropped when a factor was
  // attached above the limit (e.g. a coherent state's high photon numbers).
  std::optional<int> max_excitation;
  double excitation_leak_max = 0.0;
  double attach_dropped_max = 0.0;

  long steps() const { return adaptive_steps + exponential_evaluations; }
  bool ok() const { return status == Status::kSuccess; }
  std::string brief_report() const;
  std::string full_report() const;
};

struct TrajectoryResult {
  std::vector<JumpRecord> jumps;
  std::vector<MeasurementRecord> measurements;
  // samples[k][j] = ⟨observable j⟩ at sample_times_us[k] (NaN for samples not reached).
  std::vector<std::vector<operators::Complex>> samples;
  Summary summary;
};

}  // namespace flyby::trajectory
