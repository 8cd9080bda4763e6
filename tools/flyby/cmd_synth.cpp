// `flyby synth -o RUN.h5 --channel A:5e5 --channel B:5e5 [--pair-rate-per-s R ...]`: a synthetic
// record of Poisson channels, optionally with correlated pairs whose delay carries a damped
// beat. For testing analysis pipelines and for scale runs: the record is written streaming, so
// 10^9 tags need no more memory than 10^6 (engine/records/synthetic_tags.h).
#include <iostream>

#include "engine/common/errors.h"
#include "engine/records/synthetic_tags.h"
#include "tools/flyby/commands.h"

namespace {

struct SynthArgs {
  std::string output;
  std::vector<std::string> channels;
  double duration_s = 1.0, resolution_ps = 1.0;
  std::uint64_t seed = 1;
  std::optional<std::uint64_t> max_tags;
  std::size_t chunk_tags = 1 << 16;
  std::string pair_first, pair_second;
  double pair_rate_per_s = 0, pair_decay_us = 1.0, beat_MHz = 0, beat_visibility = 0;
};

flyby::records::SyntheticChannel parse_channel(const std::string& text) {
  // NAME:RATE_PER_S[:ROLE]
  const auto c1 = text.find(':');
  if (c1 == std::string::npos) throw flyby::InputError("--channel '" + text.substr(0, 80) + "': expected NAME:RATE_PER_S[:ROLE]");
  const auto c2 = text.find(':', c1 + 1);
  flyby::records::SyntheticChannel c;
  c.name = text.substr(0, c1);
  const std::string rate = text.substr(c1 + 1, c2 == std::string::npos ? std::string::npos : c2 - c1 - 1);
  std::size_t used = 0;
  try {
    c.rate_per_s = std::stod(rate, &used);
  } catch (const std::exception&) {
    used = 0;
  }
  if (used == 0 || used != rate.size()) throw flyby::InputError("--channel '" + text.substr(0, 80) + "': rate '" + rate + "' is not a number");
  if (c2 != std::string::npos) {
    const auto role = flyby::records::channel_role_from_string(text.substr(c2 + 1));
    if (!role) throw flyby::InputError("--channel '" + text.substr(0, 80) + "': role must be detector, herald or marker");
    c.role = *role;
  }
  return c;
}

void run_synth(const SynthArgs& a) {
  using namespace flyby::records;
  SyntheticOptions o;
  if (a.channels.empty()) throw flyby::InputError("give at least one --channel NAME:RATE_PER_S");
  for (const auto& c : a.channels) o.channels.push_back(parse_channel(c));
  o.duration_s = a.duration_s;
  o.resolution_ps = a.resolution_ps;
  o.seed = a.seed;
  o.max_tags = a.max_tags;
  o.writer.chunk_tags = a.chunk_tags;
  auto find = [&](const std::string& name, const char* flag) {
    for (std::size_t i = 0; i < o.channels.size(); ++i)
      if (o.channels[i].name == name) return i;
    throw flyby::InputError(std::string(flag) + " '" + name.substr(0, 80) + "' is not one of the --channel names");
  };
  if (a.pair_rate_per_s > 0) {
    SyntheticPairs p;
    if (a.pair_first.empty() || a.pair_second.empty())
      throw flyby::InputError("--pair-rate-per-s needs --pair-first and --pair-second");
    p.first = find(a.pair_first, "--pair-first");
    p.second = find(a.pair_second, "--pair-second");
    p.rate_per_s = a.pair_rate_per_s;
    p.decay_us = a.pair_decay_us;
    p.beat_MHz = a.beat_MHz;
    p.visibility = a.beat_visibility;
    o.pairs = p;
  }
  const auto s = write_synthetic_record(a.output, o, current_record_provenance("synthetic", {}, a.seed));
  std::cout << "flyby synth: " << s.brief_report() << " -> " << a.output << "\n";
}

void register_synth(CLI::App& app) {
  auto args = std::make_shared<SynthArgs>();
  CLI::App* c = app.add_subcommand("synth", "Write a synthetic record: Poisson channels, optionally with beat-correlated pairs");
  c->add_option("-o,--output", args->output, "Output record (.h5); written atomically")->required();
  c->add_option("--channel", args->channels,
                "Channel NAME:RATE_PER_S[:ROLE] (role detector, herald or marker); repeat per channel, ids in order");
  c->add_option("--duration-s", args->duration_s, "Acquisition window, s")->capture_default_str();
  c->add_option("--resolution-ps", args->resolution_ps, "Tagger resolution, ps (times rounded down to it)")->capture_default_str();
  c->add_option("--seed", args->seed, "Master seed")->capture_default_str();
  c->add_option("--max-tags", args->max_tags, "Stop after this many tags (the window ends at the last tag)");
  c->add_option("--chunk-tags", args->chunk_tags, "HDF5 chunk size of the tag datasets, tags (1024..16777216)")
      ->capture_default_str();
  auto* g = c->add_option_group("correlated pairs");
  g->add_option("--pair-rate-per-s", args->pair_rate_per_s, "Rate of correlated pairs, per s (0: none)");
  g->add_option("--pair-first", args->pair_first, "Channel of the first tag of a pair");
  g->add_option("--pair-second", args->pair_second, "Channel of the delayed second tag");
  g->add_option("--pair-decay-us", args->pair_decay_us, "Decay time of the delay distribution, us")->capture_default_str();
  g->add_option("--beat-MHz", args->beat_MHz, "Beat frequency of the delay distribution, MHz")->capture_default_str();
  g->add_option("--beat-visibility", args->beat_visibility, "Beat visibility, 0..1")->capture_default_str();
  c->callback([args] { run_synth(*args); });
}

const flyby::cli::CommandRegistrar kRegisterSynth{53, &register_synth};

}  // namespace
