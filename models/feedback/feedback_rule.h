// Feedback rules: a detected click changes a drive inside the trajectory (DESIGN.md §5, issue 4
// item 8). The engine executes them; this header only describes and validates them.
//
// Semantics (one rule): a detected click in `trigger_channel` at time t arms the rule unless it
// is in hold-off; at t + latency the drive `drive` is set to `level` × its configured amplitude
// (Rabi frequency or resonator-drive amplitude; 0 switches it off) for `duration`, then it
// returns to its configured amplitude. After a trigger, clicks before t + holdoff are ignored by
// this rule (holdoff is measured from the triggering click and must be ≥ latency + duration so
// that two actions of one rule never overlap). Rules act on distinct drives or, if on the same
// drive, must not overlap in time — the engine applies the later-listed rule when they do.
#pragma once

#include <string>
#include <vector>

namespace flyby::feedback {

struct FeedbackRule {
  std::string name;             // label for the run summary
  std::string trigger_channel;  // detected channel whose clicks trigger the rule
  std::string drive;            // name of the side or resonator drive that is changed
  double latency_ns = 0.0;      // click → change, ns, ≥ 0
  double level = 0.0;           // amplitude factor during the action, ≥ 0 (0 = off)
  double duration_ns = 0.0;     // how long the changed level lasts, ns, > 0
  double holdoff_ns = 0.0;      // dead time of the rule after a trigger, ns, ≥ latency + duration
};

// Checks values and that trigger_channel is a detected channel and drive exists.
// Throws flyby::InputError naming the rule and what is wrong.
void validate(const FeedbackRule& rule, const std::vector<std::string>& detected_channels,
              const std::vector<std::string>& drives);

}  // namespace flyby::feedback
