// Feedback rule validation (see feedback_rule.h).
#include "models/feedback/feedback_rule.h"

#include <algorithm>
#include <cmath>

#include "engine/common/errors.h"

namespace flyby::feedback {

namespace {
std::string list(const std::vector<std::string>& v) {
  std::string s;
  for (const auto& x : v) s += (s.empty() ? "" : ", ") + x;
  return s.empty() ? "(none)" : s;
}
}  // namespace

void validate(const FeedbackRule& r, const std::vector<std::string>& channels, const std::vector<std::string>& drives) {
  const std::string who = "feedback rule '" + r.name + "': ";
  if (std::find(channels.begin(), channels.end(), r.trigger_channel) == channels.end()) {
    throw InputError(who + "trigger channel '" + r.trigger_channel + "' is not a detected channel (have: " + list(channels) + ")");
  }
  if (std::find(drives.begin(), drives.end(), r.drive) == drives.end()) {
    throw InputError(who + "drive '" + r.drive + "' does not exist (have: " + list(drives) + ")");
  }
  if (!(std::isfinite(r.latency_ns) && r.latency_ns >= 0.0)) throw InputError(who + "latency must be ≥ 0");
  if (!(std::isfinite(r.level) && r.level >= 0.0)) throw InputError(who + "level must be ≥ 0");
  if (!(std::isfinite(r.duration_ns) && r.duration_ns > 0.0)) throw InputError(who + "duration must be > 0");
  if (!(std::isfinite(r.holdoff_ns) && r.holdoff_ns >= r.latency_ns + r.duration_ns)) {
    throw InputError(who + "hold-off must be ≥ latency + duration so that actions do not overlap");
  }
}

}  // namespace flyby::feedback
