// Options of the detector and tagger chain (models/detectors/detector_chain.h): one struct per
// detector channel and one for the time tagger. Defaults describe an ideal detector; the valid
// ranges are checked by problem(). Typical silicon avalanche modules (REFERENCES.md, common
// practice): efficiency 0.5-0.7 near 780 nm, dead time 20-50 ns, jitter 300-600 ps FWHM, dark
// counts 25-1500 /s, afterpulse probability 0.5-1 %.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "engine/records/record_format.h"
#include "models/detectors/jitter_histogram.h"

namespace flyby::detectors {

enum class DeadTimeModel {
  kNonParalyzable,  // a click makes the detector blind for dead_time; arrivals meanwhile are lost
  kParalyzable,     // every arrival, recorded or not, restarts the dead time
};
std::string_view to_string(DeadTimeModel m);
std::optional<DeadTimeModel> dead_time_model_from_string(std::string_view text);

struct DetectorChannelOptions {
  // Id, name and role of the channel in the written record.
  records::Channel channel;
  // Probability that a photon reaching this detector produces an avalanche. Range [0, 1].
  // 1 when the efficiency is already part of the detection channel's collapse operator.
  double efficiency = 1.0;
  // Dead time after a click, ns. Range [0, 1e9]. 0 = none.
  double dead_time_ns = 0.0;
  DeadTimeModel dead_time_model = DeadTimeModel::kNonParalyzable;
  // Gaussian timing jitter, full width at half maximum, ps. Range [0, 1e6]. Draws are cut at
  // ±8 σ (probability < 1e-15) so the re-sorting window is bounded.
  double jitter_fwhm_ps = 0.0;
  // Measured jitter distribution; replaces the Gaussian when set.
  std::optional<JitterHistogram> jitter_histogram;
  // Dark-count rate, counts per second (Poisson process, subject to dead time). Range [0, 1e8].
  double dark_rate_per_s = 0.0;
  // Probability that a click (of any origin) triggers one afterpulse. Range [0, 0.5].
  double afterpulse_probability = 0.0;
  // The afterpulse follows the click after afterpulse_delay_ns + an exponential random time
  // with mean afterpulse_time_constant_ns. Ranges [0, 1e9] ns each. An afterpulse that falls
  // into the dead time is lost, as in a real module; choose the delay >= the dead time to see it.
  double afterpulse_delay_ns = 0.0;
  double afterpulse_time_constant_ns = 0.0;
  // Signal delay from detector to tagger (cable and electronics), ns; negative values align a
  // channel earlier. Range [-1e6, 1e6].
  double cable_delay_ns = 0.0;

  // Empty if every field is in range, else a one-line message naming the field.
  std::optional<std::string> problem() const;
};

struct TaggerOptions {
  // Bin width of the time tagger, ps; tags are floor(t / resolution) * resolution, rounded to
  // the nearest ps. Range (0, 1e6].
  double resolution_ps = 1.0;
  // Largest sustained tag rate of the tagger, tags per second over all channels. A tag closer
  // than 1 / max_rate_per_s to the previous recorded tag is lost. Unset = unlimited.
  // Range [1, 1e10].
  std::optional<double> max_rate_per_s;

  std::optional<std::string> problem() const;
};

struct DetectorChainOptions {
  std::vector<DetectorChannelOptions> channels;  // at most 256; ids and names unique
  TaggerOptions tagger;

  std::optional<std::string> problem() const;
};

}  // namespace flyby::detectors
