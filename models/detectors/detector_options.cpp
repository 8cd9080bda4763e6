// Range checks of the detector and tagger options.
#include "models/detectors/detector_options.h"

#include <array>
#include <cmath>

namespace flyby::detectors {
namespace {

std::optional<std::string> range(const std::string& who, const char* field, double v, double lo, double hi) {
  if (!std::isfinite(v) || v < lo || v > hi) {
    return who + ": " + field + " = " + std::to_string(v) + " is outside [" + std::to_string(lo) + ", " +
           std::to_string(hi) + "]";
  }
  return std::nullopt;
}

}  // namespace

std::string_view to_string(DeadTimeModel m) {
  return m == DeadTimeModel::kParalyzable ? "paralyzable" : "non-paralyzable";
}

std::optional<DeadTimeModel> dead_time_model_from_string(std::string_view text) {
  if (text == "non-paralyzable") return DeadTimeModel::kNonParalyzable;
  if (text == "paralyzable") return DeadTimeModel::kParalyzable;
  return std::nullopt;
}

std::optional<std::string> DetectorChannelOptions::problem() const {
  const std::string who = "detector channel '" + channel.name + "'";
  if (!records::is_valid_channel_name(channel.name)) {
    return who + ": invalid name (use 1-64 characters from A-Z a-z 0-9 _ . + -)";
  }
  if (auto p = range(who, "efficiency", efficiency, 0.0, 1.0)) return p;
  if (auto p = range(who, "dead_time_ns", dead_time_ns, 0.0, 1e9)) return p;
  if (auto p = range(who, "jitter_fwhm_ps", jitter_fwhm_ps, 0.0, 1e6)) return p;
  if (auto p = range(who, "dark_rate_per_s", dark_rate_per_s, 0.0, 1e8)) return p;
  if (auto p = range(who, "afterpulse_probability", afterpulse_probability, 0.0, 0.5)) return p;
  if (auto p = range(who, "afterpulse_delay_ns", afterpulse_delay_ns, 0.0, 1e9)) return p;
  if (auto p = range(who, "afterpulse_time_constant_ns", afterpulse_time_constant_ns, 0.0, 1e9)) return p;
  if (auto p = range(who, "cable_delay_ns", cable_delay_ns, -1e6, 1e6)) return p;
  if (jitter_histogram) {
    if (auto p = histogram_problem(*jitter_histogram)) return who + ": " + *p;
  }
  return std::nullopt;
}

std::optional<std::string> TaggerOptions::problem() const {
  if (!std::isfinite(resolution_ps) || !(resolution_ps > 0) || resolution_ps > 1e6) {
    return "tagger: resolution_ps = " + std::to_string(resolution_ps) + " is outside (0, 1e6]";
  }
  if (max_rate_per_s) return range("tagger", "max_rate_per_s", *max_rate_per_s, 1.0, 1e10);
  return std::nullopt;
}

std::optional<std::string> DetectorChainOptions::problem() const {
  if (channels.empty()) return "detector chain: no channels";
  if (channels.size() > 256) return "detector chain: more than 256 channels";
  std::array<bool, 256> seen{};
  for (std::size_t i = 0; i < channels.size(); ++i) {
    if (auto p = channels[i].problem()) return p;
    const auto id = channels[i].channel.id;
    if (seen[id]) return "detector chain: channel id " + std::to_string(id) + " used twice";
    seen[id] = true;
    for (std::size_t j = 0; j < i; ++j) {
      if (channels[j].channel.name == channels[i].channel.name) {
        return "detector chain: channel name '" + channels[i].channel.name + "' used twice";
      }
    }
  }
  return tagger.problem();
}

}  // namespace flyby::detectors
