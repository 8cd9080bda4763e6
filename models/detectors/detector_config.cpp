// Mapping of config::DetectorParams and the [run] tagger keys to DetectorChainOptions.
#include "models/detectors/detector_config.h"

#include "engine/common/errors.h"

namespace flyby::detectors {

DetectorChainOptions detector_chain_options(const config::ScenarioConfig& scenario) {
  DetectorChainOptions o;
  if (scenario.detectors.size() > 256) {
    throw InputError(scenario.source_name + ": more than 256 detection channels (the record format allows 256)");
  }
  for (std::size_t i = 0; i < scenario.detectors.size(); ++i) {
    const config::DetectorParams& d = scenario.detectors[i];
    DetectorChannelOptions c;
    c.channel = {static_cast<records::ChannelId>(i), d.channel, records::ChannelRole::kDetector};
    c.efficiency = 1.0;
    c.dead_time_ns = d.dead_time_ns;
    c.dead_time_model = d.paralyzable ? DeadTimeModel::kParalyzable : DeadTimeModel::kNonParalyzable;
    c.jitter_fwhm_ps = d.jitter_fwhm_ps;
    c.dark_rate_per_s = d.dark_rate_per_s;
    c.afterpulse_probability = d.afterpulse_probability;
    c.afterpulse_delay_ns = d.afterpulse_delay_ns;
    c.afterpulse_time_constant_ns = d.afterpulse_time_constant_ns;
    c.cable_delay_ns = d.cable_delay_ns;
    o.channels.push_back(c);
  }
  o.tagger.resolution_ps = scenario.run.tagger_resolution_ps;
  o.tagger.max_rate_per_s = scenario.run.tagger_max_rate_per_s;
  if (auto p = o.problem()) throw InputError(scenario.source_name + ": " + *p);
  return o;
}

}  // namespace flyby::detectors
