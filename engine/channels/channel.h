// Decay channels of a model: labelled collapse operators C, each detected (its jumps are clicks
// a detector could record) or undetected (the rest of the physical decay). The unraveling is
// exact only when Σ_c C_c†C_c equals the physical decay operator of the model (2κ a†a per mode,
// Γ Σ_q A_q†A_q per atom, …); check_channel_completeness enforces that.
#pragma once

#include <string>
#include <vector>

#include "engine/operators/operator.h"
#include "engine/operators/time_operator.h"
#include "engine/space/subsystem.h"

namespace flyby::channels {

struct Channel {
  std::string label;            // e.g. "resonator sigma+", "free space (undetected)"
  bool detected = true;         // false: a jump happens but no click is recorded by a detector
  operators::Operator op;       // collapse operator C (time-independent part), rates in 1/µs inside
  // Optional time- or control-dependent part: C(t) = op + Σ_k c_k(t) O_k (e.g. the field of an
  // adiabatically eliminated resonator mode, a coherent sum over moving atoms with couplings g(t)
  // plus the drive's amplitude). Empty for a constant channel. The integrator applies C(t) and
  // its −(i/2) C(t)†C(t) without forming products of coefficients. Such channels are not part of
  // check_channel_completeness (their C†C is time dependent): the model that builds them must
  // make them add up to its physical decay itself (and test that).
  operators::TimeOperator timed{};

  bool time_dependent() const { return !timed.terms().empty(); }
  // C at time t_us for the given control values: op + Σ_k c_k(t) O_k.
  operators::Operator at(double t_us, const std::vector<operators::Complex>& controls) const;
};

// Throws flyby::InputError naming the subsystems and the size of the mismatch unless
// Σ_c C_c†C_c == physical_decay within relative_tolerance (Frobenius norm, relative to the
// decay operator's norm); time-dependent channels (Channel::timed) are left out. The check is done
// per group of subsystems coupled by some channel or decay term, so it stays cheap for clusters
// with many atoms.
void check_channel_completeness(const std::vector<space::Subsystem>& subsystems,
                                const std::vector<Channel>& channels,
                                const operators::Operator& physical_decay,
                                double relative_tolerance = 1e-9);

// The check remembers, per thread, the groups that passed (the last 32, compared exactly by
// their subsystems' bases, channels, decay terms and tolerance — not by subsystem names or ids):
// an identical group, e.g. the next atom of a beam, is not recomputed. Number of such skips on
// the calling thread so far (for tests).
std::size_t channel_completeness_cache_hits();

}  // namespace flyby::channels
