// From a scenario config (models/config) to the detector-chain options: one detector channel per
// [[channel]] in file order (record id = position, name = channel name, role detector), the
// chain's efficiency 1 (the config's efficiency_fraction is part of the channel's collapse
// operator), and the tagger from [run].
#pragma once

#include "models/config/scenario_config.h"
#include "models/detectors/detector_options.h"

namespace flyby::detectors {

// Throws InputError if the result fails DetectorChainOptions::problem() (the message names the
// config file) — e.g. more than 256 channels.
DetectorChainOptions detector_chain_options(const config::ScenarioConfig& scenario);

}  // namespace flyby::detectors
