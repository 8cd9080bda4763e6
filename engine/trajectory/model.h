// What a trajectory integrates: the interface between a physical model (the scenario layer) and
// the engine. A Model lists every subsystem that may be present during the trajectory, the
// initially present ones with their pure states, a Hamiltonian with time-dependent and
// control-dependent coefficients, labelled decay channels, the physical decay they must add up
// to, a fixed schedule of events (attach / detach / set a control), and an optional jump hook that
// may schedule more events after each jump (feedback). See docs/engine.md.
#pragma once

#include <functional>
#include <optional>
#include <queue>
#include <string>
#include <variant>
#include <vector>

#include "engine/channels/channel.h"
#include "engine/operators/time_operator.h"
#include "engine/space/subsystem.h"

namespace flyby::trajectory {

using operators::Complex;
using space::SubsystemId;
using space::Vector;

// Bring a subsystem into the state (appended as the last tensor factor) in a pure local state.
struct Attach {
  SubsystemId subsystem = 0;
  Vector state;  // normalized, length = the subsystem's dimension
};
// Measure a subsystem in its basis (Born rule) and remove it; the outcome is recorded.
struct Detach {
  SubsystemId subsystem = 0;
};
// Set a control (a piecewise-constant coefficient factor, e.g. a drive level) to a value.
struct SetControl {
  int control = 0;
  Complex value{1.0, 0.0};
};
using Action = std::variant<Attach, Detach, SetControl>;

struct Event {
  double time_us = 0.0;
  Action action;
};

// Pending events of one trajectory, processed in time order; equal times in insertion order.
class Schedule {
 public:
  void add(double time_us, Action action) { queue_.push(Entry{time_us, next_seq_++, std::move(action)}); }
  bool empty() const { return queue_.empty(); }
  double next_time_us() const { return queue_.top().time_us; }
  Event pop() {
    Entry e = queue_.top();
    queue_.pop();
    return Event{e.time_us, std::move(e.action)};
  }

 private:
  struct Entry {
    double time_us;
    long seq;
    Action action;
    bool operator>(const Entry& o) const { return time_us != o.time_us ? time_us > o.time_us : seq > o.seq; }
  };
  std::priority_queue<Entry, std::vector<Entry>, std::greater<Entry>> queue_;
  long next_seq_ = 0;
};

// What the jump hook learns about a jump.
struct JumpInfo {
  double time_us = 0.0;
  int channel = 0;        // index into Model::channels
  bool detected = true;
};

// Called after every jump with the trajectory's schedule; may add events at times ≥ the jump
// time (e.g. feedback: SetControl at click + latency, and back at click + latency + duration).
// The hook is copied at the start of every trajectory, so state captured by value in a lambda
// (a hold-off timer) is per trajectory. It must not touch shared mutable state.
using JumpHook = std::function<void(const JumpInfo&, Schedule&)>;

struct InitialFactor {
  SubsystemId subsystem = 0;
  Vector state;  // normalized pure local state
};

struct Model {
  std::vector<space::Subsystem> subsystems;   // every subsystem that may ever be present
  std::vector<InitialFactor> initial;         // present at start_us, in this tensor order
  operators::TimeOperator hamiltonian;        // H(t) in rad/µs (ħ = 1); must be Hermitian
  std::vector<channels::Channel> channels;    // collapse operators, √(rate in 1/µs) · operator
  operators::Operator physical_decay;         // what Σ C†C must equal (2κ a†a, Γ Σ A_q†A_q, …)
  std::vector<Complex> controls;              // initial control values
  std::vector<std::string> control_names;     // optional, for messages
  std::vector<Event> events;                  // fixed schedule (arrivals, departures, switching)
  JumpHook on_jump;                           // optional (feedback)
  double start_us = 0.0;                      // trajectory start, µs
  double end_us = 1.0;                        // trajectory end, µs, > start_us
  // Keep only basis states with at most this many excitations summed over the present
  // subsystems (space::Subsystem::excitation; weak-drive truncation, docs/engine.md); unset:
  // the full tensor product. The summary reports the estimated leaked norm.
  std::optional<int> max_excitation;
};

}  // namespace flyby::trajectory
