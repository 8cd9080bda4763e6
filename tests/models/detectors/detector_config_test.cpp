// The example scenario's [[channel]] detector keys arrive in the detector-chain options
// unchanged (configs/thermal_beam_resonator.toml, an invented scenario).
#include <catch2/catch.hpp>

#include "models/config/scenario_config.h"
#include "models/detectors/detector_config.h"

using namespace flyby::detectors;

TEST_CASE("detector options from the example scenario config", "[detectors]") {
  const auto cfg = flyby::config::load_config_file(std::string(FLYBY_SOURCE_DIR) + "/configs/thermal_beam_resonator.toml");
  const DetectorChainOptions o = detector_chain_options(cfg);
  REQUIRE(o.channels.size() == cfg.detectors.size());
  REQUIRE(o.channels.size() >= 2);
  // Values written in configs/thermal_beam_resonator.toml for the two resonator channels.
  CHECK(o.channels[0].channel.name == "sigma_plus");
  CHECK(o.channels[0].channel.id == 0);
  CHECK(o.channels[0].dead_time_ns == 22);
  CHECK(o.channels[0].jitter_fwhm_ps == 350);
  CHECK(o.channels[0].dark_rate_per_s == 80);
  CHECK(o.channels[0].afterpulse_probability == 0.006);
  CHECK(o.channels[0].afterpulse_delay_ns == 30);
  CHECK(o.channels[0].afterpulse_time_constant_ns == 60);
  CHECK(o.channels[0].efficiency == 1.0);  // efficiency_fraction belongs to the collapse operator
  CHECK(o.channels[1].channel.name == "sigma_minus");
  CHECK(o.channels[1].dark_rate_per_s == 120);
  CHECK(o.channels[1].cable_delay_ns == 1.5);
  CHECK(o.tagger.resolution_ps == cfg.run.tagger_resolution_ps);
  CHECK(!o.problem());
}
