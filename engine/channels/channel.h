// Decay channels of a model: labelled collapse operators C, each detected (its jumps are clicks
// a detector could record) or undetected (the rest of the physical decay). The unraveling is
// exact only when Σ_c C_c†C_c equals the physical decay operator of the model (2κ a†a per mode,
// Γ Σ_q A_q†A_q per atom, …); check_channel_completeness enforces that.
#pragma once

#include <string>
#include <vector>

#include "engine/operators/operator.h"
#include "engine/space/subsystem.h"

namespace flyby::channels {

struct Channel {
  std::string label;            // e.g. "resonator sigma+", "free space (undetected)"
  bool detected = true;         // false: a jump happens but no click is recorded by a detector
  operators::Operator op;       // collapse operator C (time-independent), rates in 1/µs inside
};

// Throws flyby::InputError naming the subsystems and the size of the mismatch unless
// Σ_c C_c†C_c == physical_decay within relative_tolerance (Frobenius norm, relative to the
// decay operator's norm). The check is done per group of subsystems coupled by some channel or
// decay term, so it stays cheap for clusters with many atoms.
void check_channel_completeness(const std::vector<space::Subsystem>& subsystems,
                                const std::vector<Channel>& channels,
                                const operators::Operator& physical_decay,
                                double relative_tolerance = 1e-9);

}  // namespace flyby::channels
