// The `flyby analyze` pipeline (see record_analysis.h).
#include "models/analysis/record_analysis.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <sstream>
#include <tuple>

#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "engine/records/record_reader.h"

namespace flyby::analysis {

std::optional<std::string> RecordAnalysisOptions::validate() const {
  if (!(bin_width_ns > 0) || !std::isfinite(bin_width_ns)) return "--bin-ns must be > 0";
  if (!(range_ns >= 10 * bin_width_ns) || !std::isfinite(range_ns)) return "--range-ns must be at least 10 bins";
  if (!(tau_min_ns >= 0) || tau_min_ns > range_ns - 5 * bin_width_ns)
    return "--tau-min-ns must be in [0, range - 5 bins]";
  if (slices < 2) return "--slices must be >= 2";
  if (!(significance_sigma > 0)) return "--significance must be > 0";
  if (block_tags < 1) return "--block-tags must be >= 1";
  if (jackknife_blocks == 1 || jackknife_blocks < 0) return "--jackknife-blocks must be 0 (off) or >= 2";
  return std::nullopt;
}

const char* to_string(RecordAnalysisStatus s) {
  return s == RecordAnalysisStatus::kSuccess ? "success" : "partial";
}

namespace {

std::int64_t whole_ps(double ns, const char* what) {
  const double ps = ns * 1e3;
  if (!std::isfinite(ps) || std::abs(ps - std::round(ps)) > 1e-6 * std::max(1.0, std::abs(ps)))
    throw InputError(std::string(what) + " " + std::to_string(ns) + " ns is not a whole number of ps");
  return std::llround(ps);
}

int resolve(const records::RecordHeader& h, const std::string& text, const std::string& where) {
  if (auto i = h.channel_index(text)) return h.channels[*i].id;
  try {
    std::size_t used = 0;
    const int id = std::stoi(text, &used);
    if (used == text.size() && id >= 0 && id <= 255 && h.channel_index(static_cast<records::ChannelId>(id))) return id;
  } catch (const std::exception&) {
  }
  std::string names;
  for (const auto& c : h.channels) names += (names.empty() ? "" : ", ") + c.name;
  throw InputError(where + " '" + text + "': no such channel in the record (channels: " + names + ")");
}

std::string name_of(const records::RecordHeader& h, int id) {
  auto i = h.channel_index(static_cast<records::ChannelId>(id));
  return i ? h.channels[*i].name : std::to_string(id);
}

// Parameter index by name, or −1.
int index_of(const G2FitResult& r, const std::string& name) {
  const auto& n = r.fit.parameter_names;
  auto it = std::find(n.begin(), n.end(), name);
  return it == n.end() ? -1 : static_cast<int>(it - n.begin());
}

Estimate param(const G2FitResult& r, int i) {
  const double e = r.fit.standard_errors[static_cast<std::size_t>(i)];
  return {r.fit.parameters[static_cast<std::size_t>(i)], e, e, 0};
}

Estimate with_error(double value, double err) { return {value, err, err, 0}; }

bool finite_fit(const G2FitResult& r) {
  for (std::size_t i = 0; i < r.fit.parameters.size(); ++i)
    if (!std::isfinite(r.fit.parameters[i]) || !std::isfinite(r.fit.standard_errors[i]) || !(r.fit.standard_errors[i] > 0))
      return false;
  return true;
}

std::string fmt_sigma(double n) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%g sigma", n);
  return buf;
}

// Every term beyond the level is significant and physically sensible.
std::optional<std::string> weak_term(const G2FitResult& r, double nsigma, double tau_min_us, double range_us) {
  if (int i = index_of(r, "beat.amplitude"); i >= 0) {
    const auto a = param(r, i);
    if (a.value < nsigma * a.std_error) return "beat amplitude below " + fmt_sigma(nsigma);
    const auto d = param(r, index_of(r, "beat.decay_us"));
    if (d.value <= 0) return "beat decay time not positive";
  }
  if (int i = index_of(r, "transit_gauss.amplitude"); i >= 0) {
    const auto a = param(r, i);
    if (a.value < nsigma * a.std_error) return "transit envelope below " + fmt_sigma(nsigma);
    const auto t = param(r, index_of(r, "transit_gauss.transit_us"));
    if (!(t.value > 0.3 * tau_min_us) || t.value > 10 * range_us) return "transit time outside the analysed delays";
  }
  return std::nullopt;
}

void interpret(PairAnalysis& p) {
  const auto& r = *p.fit;
  const int level_i = index_of(r, "level");
  if (int i = index_of(r, "beat.freq_MHz"); i >= 0) {
    p.beat_MHz = param(r, i);
    p.beat_decay_us = param(r, index_of(r, "beat.decay_us"));
  }
  if (int i = index_of(r, "transit_gauss.transit_us"); i >= 0) p.transit_us = param(r, i);
  if (level_i < 0) return;  // a model without a level: no contrast, no atom number
  if (int i = index_of(r, "beat.freq_MHz"); i >= 0) {
    // Contrast A / c with first-order error propagation through the covariance.
    const int ai = index_of(r, "beat.amplitude");
    const double A = r.fit.parameters[static_cast<std::size_t>(ai)], c = r.fit.parameters[static_cast<std::size_t>(level_i)];
    const auto& C = r.fit.covariance;
    const double var = C(ai, ai) / (c * c) + A * A * C(level_i, level_i) / (c * c * c * c) - 2 * A * C(ai, level_i) / (c * c * c);
    p.beat_contrast = with_error(A / c, std::sqrt(std::max(0.0, var)));
  }
  if (int i = index_of(r, "transit_gauss.amplitude"); i >= 0) {
    // N_eff = c / a (Kimble, Dagenais & Mandel 1978: excess = env / N on the background c).
    const double A = r.fit.parameters[static_cast<std::size_t>(i)], c = r.fit.parameters[static_cast<std::size_t>(level_i)];
    const auto& C = r.fit.covariance;
    const double var = C(level_i, level_i) / (A * A) + c * c * C(i, i) / (A * A * A * A) - 2 * c * C(i, level_i) / (A * A * A);
    p.atoms_effective = with_error(c / A, std::sqrt(std::max(0.0, var)));
  }
}

// Delete-one-block jackknife (Quenouille–Tukey; e.g. B. Efron, "The Jackknife, the Bootstrap and
// Other Resampling Plans" (1982)): refit the histogram without the starts of block b, θ_b; then
// σ² = (B − 1)/B Σ (θ_b − θ̄)². Each estimate's std_error becomes max(fit σ, jackknife σ).
void jackknife(PairAnalysis& p, const std::vector<CorrelationHistogram>& blocks, const RecordAnalysisOptions& o) {
  const auto& full = p.histogram;
  const auto& r = *p.fit;
  std::vector<std::vector<double>> values(5);  // f, decay, contrast, N_eff, τ_t
  for (const auto& b : blocks) {
    const std::uint64_t n_start = full.n_start_used - b.n_start_used;
    if (n_start == 0 || b.counts.size() != full.counts.size()) {
      p.jackknife_message = "jackknife: a block holds every start";
      return;
    }
    const double E = static_cast<double>(n_start) * static_cast<double>(full.n_stop) *
                     static_cast<double>(full.options.bin_width_ps) / static_cast<double>(full.duration_ps);
    G2Data d;
    for (std::size_t k = 0; k < full.counts.size(); ++k) {
      const double n = static_cast<double>(full.counts[k] - b.counts[k]);
      d.tau_us.push_back(static_cast<double>(full.tau_ps[k]) * 1e-6);
      d.g2.push_back(n / E);
      d.g2_err.push_back(std::sqrt(n) / E);
    }
    G2FitOptions fo;
    fo.model = r.model.spec;
    fo.tau_min_us = o.tau_min_ns * 1e-3;
    fo.start = r.fit.parameters;
    PairAnalysis q;
    try {
      q.fit = fit_g2(d, fo);
    } catch (const InputError& e) {
      p.jackknife_message = std::string("jackknife: ") + e.what();
      return;
    }
    if (!q.fit->fit.ok() || !finite_fit(*q.fit)) {
      p.jackknife_message = std::string("jackknife: a block refit did not converge (") + to_string(q.fit->fit.status) + ")";
      return;
    }
    interpret(q);
    const std::optional<Estimate>* est[5] = {&q.beat_MHz, &q.beat_decay_us, &q.beat_contrast, &q.atoms_effective, &q.transit_us};
    for (int i = 0; i < 5; ++i)
      if (*est[i]) values[static_cast<std::size_t>(i)].push_back((*est[i])->value);
  }
  std::optional<Estimate>* est[5] = {&p.beat_MHz, &p.beat_decay_us, &p.beat_contrast, &p.atoms_effective, &p.transit_us};
  const double B = static_cast<double>(blocks.size());
  for (int i = 0; i < 5; ++i) {
    auto& v = values[static_cast<std::size_t>(i)];
    if (!*est[i] || v.size() != blocks.size()) continue;
    double m = 0;
    for (double x : v) m += x / B;
    double ss = 0;
    for (double x : v) ss += (x - m) * (x - m);
    const double jk = std::sqrt((B - 1) / B * ss);
    auto& e = **est[i];
    e.jackknife_std_error = jk;
    e.std_error = std::max(e.fit_std_error, jk);
  }
}

void keep_best(std::optional<Estimate>& best, const std::optional<Estimate>& e) {
  if (e && std::isfinite(e->value) && std::isfinite(e->std_error) && (!best || e->std_error < best->std_error)) best = e;
}

}  // namespace

std::string pair_label(const PairAnalysis& p) {
  auto clean = [](std::string s) {
    for (auto& ch : s)
      if (!std::isalnum(static_cast<unsigned char>(ch)) && ch != '-' && ch != '_') ch = '_';
    return s;
  };
  return "g2_" + clean(p.start_name) + "_" + clean(p.stop_name);
}

RecordAnalysis analyze_record(const std::string& path, const RecordAnalysisOptions& o) {
  if (auto e = o.validate()) throw InputError(*e);
  RecordAnalysis a;
  a.record_path = path;
  a.jackknife_blocks = o.jackknife_blocks;
  records::RecordReader reader(path);
  a.header = reader.header();
  const auto& h = a.header;
  if (h.duration_ps <= 0) throw InputError(path + ": the record has no acquisition window (duration 0)");

  // The atom: from the scenario config in the provenance, else from the options.
  std::unique_ptr<config::CheckedScenario> scenario;
  if (!h.provenance.config_text.empty()) {
    try {
      scenario = std::make_unique<config::CheckedScenario>(
          config::check_scenario(config::parse_config(h.provenance.config_text, path + " (config in the provenance)")));
      a.simulated = true;
      a.ground = ground_level_from_scenario(*scenario);
      a.configured_field_G = scenario->config.field.field_G.norm();
    } catch (const InputError& e) {
      a.notes.push_back(std::string("The config stored in the record could not be read (") + e.what() +
                        "); the record is analysed like a measured one.");
      scenario.reset();
    }
  }
  if (!a.ground) {
    if (o.species) {
      if (!o.ground_F) throw InputError("--species needs --ground-F (the ground hyperfine level of the beat)");
      const double twoF = 2 * *o.ground_F;
      if (std::abs(twoF - std::round(twoF)) > 1e-9 || twoF < 0)
        throw InputError("--ground-F " + std::to_string(*o.ground_F) + ": not an integer or half-integer");
      a.ground = ground_level_from_species(*o.species, o.line, static_cast<int>(std::lround(twoF)));
    } else {
      a.notes.push_back(
          "The record carries no scenario config and no atom was given (--species, --ground-F, --line): beat "
          "frequencies are reported, but no magnetic field, since B = f / (|Δm| g_F μB/h) needs g_F of the atom.");
    }
  } else if (o.species && a.simulated) {
    a.notes.push_back("--species/--ground-F ignored: the record's own config names the atom.");
  }

  // Channel pairs.
  std::vector<std::tuple<int, int, std::string>> pairs;
  if (!o.pairs.empty()) {
    for (const auto& text : o.pairs) {
      const auto colon = text.find(':');
      if (colon == std::string::npos) throw InputError("--pair '" + text + "': expected START:STOP");
      const int s = resolve(h, text.substr(0, colon), "--pair"), t = resolve(h, text.substr(colon + 1), "--pair");
      pairs.emplace_back(s, t, s == t ? "auto" : "cross");
    }
  } else {
    std::vector<int> heralds, detectors;
    for (const auto& c : h.channels) {
      if (c.role == records::ChannelRole::kHerald) heralds.push_back(c.id);
      if (c.role == records::ChannelRole::kDetector) detectors.push_back(c.id);
    }
    for (int hc : heralds)
      for (const auto& c : h.channels)
        if (c.id != hc && c.role != records::ChannelRole::kMarker) pairs.emplace_back(hc, c.id, "herald");
    for (int hc : heralds) pairs.emplace_back(hc, hc, "auto");
    for (int d : detectors) pairs.emplace_back(d, d, "auto");
    if (heralds.empty())
      for (std::size_t i = 0; i < detectors.size(); ++i)
        for (std::size_t j = i + 1; j < detectors.size(); ++j) pairs.emplace_back(detectors[i], detectors[j], "cross");
    if (pairs.empty()) throw InputError(path + ": the record has no detector or herald channel to correlate");
  }

  // One pass: singles and every correlator.
  SinglesOptions so;
  so.start_ps = h.start_ps;
  so.duration_ps = h.duration_ps;
  so.slices = o.slices;
  for (const auto& c : h.channels) so.channels.push_back(c.id);
  SinglesCounter singles(so);
  std::vector<Correlator> correlators;
  std::vector<std::vector<Correlator>> block_correlators(pairs.size());
  for (const auto& [s, t, kind] : pairs) {
    CorrelatorOptions co;
    co.start_channel = s;
    co.stop_channel = t;
    co.bin_width_ps = whole_ps(o.bin_width_ns, "--bin-ns");
    co.range_ps = whole_ps(o.range_ns, "--range-ns");
    co.duration_ps = h.duration_ps;
    co.threads = o.threads;
    correlators.emplace_back(co);
    auto& bc = block_correlators[correlators.size() - 1];
    for (int b = 0; b < o.jackknife_blocks; ++b) {
      auto cb = co;
      cb.start_windows = {{h.start_ps + static_cast<std::int64_t>(static_cast<__int128>(h.duration_ps) * b / o.jackknife_blocks),
                           h.start_ps + static_cast<std::int64_t>(static_cast<__int128>(h.duration_ps) * (b + 1) / o.jackknife_blocks)}};
      bc.emplace_back(cb);
    }
  }
  records::TagBlock block;
  while (reader.read_next(block, o.block_tags)) {
    singles.add_chunk(block.time_ps, block.channel);
    for (auto& c : correlators) c.add_chunk(block.time_ps, block.channel);
    for (auto& bc : block_correlators)
      for (auto& c : bc) c.add_chunk(block.time_ps, block.channel);
  }
  std::vector<std::vector<CorrelationHistogram>> blocks(pairs.size());
  for (std::size_t k = 0; k < pairs.size(); ++k)
    for (auto& c : block_correlators[k]) blocks[k].push_back(c.finish());
  a.singles = singles.finish();
  if (a.singles.status != SinglesStatus::kSuccess) a.notes.push_back(a.singles.message + ".");

  for (std::size_t k = 0; k < pairs.size(); ++k) {
    PairAnalysis p;
    p.start_channel = std::get<0>(pairs[k]);
    p.stop_channel = std::get<1>(pairs[k]);
    p.kind = std::get<2>(pairs[k]);
    p.start_name = name_of(h, p.start_channel);
    p.stop_name = name_of(h, p.stop_channel);
    p.histogram = correlators[k].finish();
    if (p.histogram.status != CorrelatorStatus::kSuccess) {
      p.fit_message = "no g2: " + p.histogram.message;
      a.pairs.push_back(std::move(p));
      continue;
    }
    G2Data d;
    for (std::size_t b = 0; b < p.histogram.tau_ps.size(); ++b) {
      d.tau_us.push_back(static_cast<double>(p.histogram.tau_ps[b]) * 1e-6);
      d.g2.push_back(p.histogram.g2[b]);
      d.g2_err.push_back(p.histogram.g2_err[b]);
    }
    const std::vector<std::string> candidates =
        o.model == "auto" ? std::vector<std::string>{"level+transit_gauss+beat", "level+beat", "level+transit_gauss", "level"}
                          : std::vector<std::string>{o.model};
    std::string why;
    for (const auto& m : candidates) {
      G2FitOptions fo;
      fo.model = m;
      fo.tau_min_us = o.tau_min_ns * 1e-3;
      try {
        auto r = fit_g2(d, fo);
        if (!r.fit.ok() || !finite_fit(r)) {
          why += (why.empty() ? "" : "; ") + m + ": " + to_string(r.fit.status);
          continue;
        }
        if (o.model == "auto")
          if (auto weak = weak_term(r, o.significance_sigma, o.tau_min_ns * 1e-3, o.range_ns * 1e-3)) {
            why += (why.empty() ? "" : "; ") + m + ": " + *weak;
            continue;
          }
        p.fit = std::move(r);
        p.fit_message = why.empty() ? "model " + m : "model " + m + " (rejected before: " + why + ")";
        break;
      } catch (const InputError& e) {
        why += (why.empty() ? "" : "; ") + m + ": " + e.what();
      }
    }
    if (!p.fit) p.fit_message = "no model fitted: " + why;
    else {
      interpret(p);
      if (o.jackknife_blocks >= 2) jackknife(p, blocks[k], o);
      else p.jackknife_message = "jackknife off";
      if (p.beat_MHz) {
        p.delta_m = heralded_delta_m(scenario.get(), p.start_name, o.delta_m);
        if (a.ground) p.field = field_from_beat(p.beat_MHz->value, p.beat_MHz->std_error, a.ground->gF, p.delta_m->value);
      }
    }
    a.pairs.push_back(std::move(p));
  }

  for (const auto& p : a.pairs) {
    if (!p.fit) a.status = RecordAnalysisStatus::kPartial;
    keep_best(a.beat_MHz, p.beat_MHz);
    keep_best(a.transit_us, p.transit_us);
    keep_best(a.atoms_effective, p.atoms_effective);
    if (p.field) {
      const double k = 1 / p.field->MHz_per_G;
      keep_best(a.field_G, Estimate{p.field->field_G, p.field->field_err_G, p.beat_MHz->fit_std_error * k,
                                    p.beat_MHz->jackknife_std_error * k});
    }
  }
  if (!a.ground) a.status = RecordAnalysisStatus::kPartial;
  return a;
}

std::string RecordAnalysis::brief_report() const {
  std::ostringstream s;
  char buf[200];
  s << "analysis " << to_string(status) << ":";
  if (field_G) std::snprintf(buf, sizeof buf, " B = %.6g ± %.2g G;", field_G->value, field_G->std_error), s << buf;
  if (beat_MHz) std::snprintf(buf, sizeof buf, " beat %.6g ± %.2g MHz;", beat_MHz->value, beat_MHz->std_error), s << buf;
  if (atoms_effective)
    std::snprintf(buf, sizeof buf, " N_eff = %.4g ± %.2g;", atoms_effective->value, atoms_effective->std_error), s << buf;
  if (transit_us) std::snprintf(buf, sizeof buf, " transit %.4g ± %.2g us;", transit_us->value, transit_us->std_error), s << buf;
  return s.str();
}

namespace {

nlohmann::ordered_json est_json(const std::optional<Estimate>& e) {
  if (!e) return nullptr;
  return {{"value", e->value},
          {"std_error", e->std_error},
          {"fit_std_error", e->fit_std_error},
          {"jackknife_std_error", e->jackknife_std_error}};
}

}  // namespace

nlohmann::ordered_json RecordAnalysis::to_json() const {
  nlohmann::ordered_json j;
  j["status"] = to_string(status);
  j["record"] = record_path;
  j["record_source"] = header.provenance.source;
  j["record_seed"] = header.provenance.seed ? nlohmann::json(*header.provenance.seed) : nlohmann::json(nullptr);
  j["duration_s"] = header.duration_s();
  j["simulated"] = simulated;
  if (ground)
    j["atom"] = {{"species", ground->species}, {"line", ground->line}, {"ground_F", ground->ground_2F / 2.0},
                 {"ground_gF", ground->gF}, {"from", ground->source}};
  else
    j["atom"] = nullptr;
  j["configured_field_G"] = configured_field_G ? nlohmann::json(*configured_field_G) : nlohmann::json(nullptr);
  j["field_G"] = est_json(field_G);
  j["beat_MHz"] = est_json(beat_MHz);
  j["atoms_effective_count"] = est_json(atoms_effective);
  j["transit_us"] = est_json(transit_us);
  j["notes"] = notes;
  j["singles"] = nlohmann::json::array();
  for (const auto& c : singles.channels) {
    auto i = header.channel_index(static_cast<records::ChannelId>(c.channel));
    j["singles"].push_back({{"channel", i ? header.channels[*i].name : std::to_string(c.channel)},
                            {"counts", c.counts},
                            {"rate_per_s", c.rate_per_s},
                            {"rate_err_per_s", c.rate_err_per_s},
                            {"drift_chi2", c.drift_chi2},
                            {"drift_dof", c.drift_dof},
                            {"drift_p_value", c.drift_p_value},
                            {"drift_slope_per_s", c.drift_slope_per_s},
                            {"drift_slope_err_per_s", c.drift_slope_err_per_s}});
  }
  j["pairs"] = nlohmann::json::array();
  for (const auto& p : pairs) {
    nlohmann::ordered_json q;
    q["start"] = p.start_name;
    q["stop"] = p.stop_name;
    q["kind"] = p.kind;
    q["n_start"] = p.histogram.n_start_used;
    q["n_stop"] = p.histogram.n_stop;
    q["expected_counts_per_bin"] = p.histogram.expected_counts_per_bin;
    q["fit_message"] = p.fit_message;
    if (p.fit) {
      q["model"] = p.fit->model.spec;
      q["chi2"] = p.fit->fit.chi2;
      q["dof"] = p.fit->fit.dof;
      q["p_value"] = p.fit->fit.p_value;
      q["parameters"] = nlohmann::json::array();
      for (std::size_t i = 0; i < p.fit->fit.parameters.size(); ++i)
        q["parameters"].push_back({{"name", p.fit->fit.parameter_names[i]},
                                   {"value", p.fit->fit.parameters[i]},
                                   {"std_error", p.fit->fit.standard_errors[i]}});
    }
    q["beat_MHz"] = est_json(p.beat_MHz);
    q["beat_decay_us"] = est_json(p.beat_decay_us);
    q["beat_contrast"] = est_json(p.beat_contrast);
    q["delta_m"] = p.delta_m ? nlohmann::json(p.delta_m->value) : nlohmann::json(nullptr);
    q["delta_m_reason"] = p.delta_m ? nlohmann::json(p.delta_m->reason) : nlohmann::json(nullptr);
    q["field_G"] = p.field ? est_json(Estimate{p.field->field_G, p.field->field_err_G, p.beat_MHz->fit_std_error / p.field->MHz_per_G,
                                               p.beat_MHz->jackknife_std_error / p.field->MHz_per_G})
                           : nlohmann::ordered_json(nullptr);
    q["jackknife_message"] = p.jackknife_message;
    q["atoms_effective_count"] = est_json(p.atoms_effective);
    q["transit_us"] = est_json(p.transit_us);
    j["pairs"].push_back(q);
  }
  return j;
}

namespace {

std::string pm(const std::optional<Estimate>& e, const char* unit) {
  if (!e) return "—";
  char buf[120];
  if (e->std_error > 0 && std::isfinite(e->std_error)) {
    const int digits = std::max(0, 1 - static_cast<int>(std::floor(std::log10(e->std_error))));
    std::snprintf(buf, sizeof buf, "%.*f ± %.*f %s", digits, e->value, digits, e->std_error, unit);
  } else {
    std::snprintf(buf, sizeof buf, "%.6g %s", e->value, unit);
  }
  return buf;
}

}  // namespace

std::string markdown_report(const RecordAnalysis& a, const std::vector<std::pair<std::string, std::string>>& figures,
                            const std::string& figure_problem) {
  auto figure = [&](const std::string& key, const std::string& caption) {
    for (const auto& [k, f] : figures)
      if (k == key) return "![" + caption + "](" + f + ")\n\n";
    return "*Figure missing (" + caption + "): " + (figure_problem.empty() ? std::string("not drawn") : figure_problem) + ".*\n\n";
  };
  std::ostringstream s;
  const auto& h = a.header;
  s << "# Analysis of `" << a.record_path << "`\n\n";
  s << "| | |\n|---|---|\n";
  s << "| record source | " << (h.provenance.source.empty() ? "unknown" : h.provenance.source) << " |\n";
  if (h.provenance.seed) s << "| simulation seed | " << *h.provenance.seed << " |\n";
  char buf[256];
  std::snprintf(buf, sizeof buf, "| duration | %.6g s |\n| tagger resolution | %.6g ps |\n", h.duration_s(), h.resolution_ps);
  s << buf;
  if (a.ground) {
    std::snprintf(buf, sizeof buf, "| atom | %s %s, ground F = %g, g_F = %.7g (%s) |\n", a.ground->species.c_str(),
                  a.ground->line.c_str(), a.ground->ground_2F / 2.0, a.ground->gF,
                  a.ground->source == "config" ? "from the record's config" : "from the command line");
    s << buf;
  } else {
    s << "| atom | unknown (no config in the record, no --species) |\n";
  }
  s << "| status | " << to_string(a.status) << " |\n\n";

  s << "## Results\n\n| quantity | value | from |\n|---|---|---|\n";
  s << "| magnetic field B | " << pm(a.field_G, "G") << " | beat frequency via g_F |\n";
  if (a.configured_field_G) {
    std::snprintf(buf, sizeof buf, "| configured \\|B\\| (simulation) | %.6g G | record config |\n", *a.configured_field_G);
    s << buf;
  }
  s << "| beat frequency | " << pm(a.beat_MHz, "MHz") << " | g2 fit |\n";
  s << "| effective mean atom number N_eff | " << pm(a.atoms_effective, "") << " | transit envelope (KDM 1978) |\n";
  s << "| transit time τ_t | " << pm(a.transit_us, "µs") << " | transit envelope |\n\n";
  s << "Each value is the estimate of the channel pair with the smallest standard error (pairs share data, so "
       "they are not averaged); errors are 1σ (see Assumptions).\n\n";

  s << "## Assumptions\n\n";
  s << "* g2(τ) = counts / (N_start N_stop W / T), Poisson errors; fits by weighted nonlinear least squares "
       "(GSL) with Poisson weights from the model, on bins with τ ≥ "
    << "the fit start given below.\n";
  s << "* Errors (1σ) are the larger of the fit's σ (independent Poisson bins) and a delete-one-block jackknife "
       "σ over " << a.jackknife_blocks << " time blocks (refits without each block's starts): photons of one atom's "
       "passage arrive in correlated bursts, so bins are not independent and the fit's σ alone can be too small.\n";
  s << "* B = f / (|Δm| |g_F| μB/h), linear Zeeman effect of the ground level, μB/h = 1.39962449361 MHz/G "
       "(CODATA 2018). Light shifts of the drive and the quadratic Zeeman effect are neglected.\n";
  for (const auto& p : a.pairs)
    if (p.delta_m) s << "* Pair " << p.start_name << " → " << p.stop_name << ": " << p.delta_m->reason << "\n";
  s << "* Atom number and transit time: independent emitters with a Poisson number in the mode (H. J. Kimble, "
       "M. Dagenais and L. Mandel, Phys. Rev. A 18, 201 (1978)): g2(τ) = 1 + g2_1(τ) env(τ)/N_eff, with the "
       "single-atom g2_1 → 1 at the fitted delays; the envelope a e^{−τ²/τ_t²} on the level c gives N_eff = c/a. "
       "For weak excitation of a Gaussian profile of 1/e² radius w crossed at speed v, τ_t = w/v and N_eff is the "
       "mean number within the radius w (a standing-wave resonator mode: 2/3 of it).\n";
  for (const auto& n : a.notes) s << "* " << n << "\n";
  s << "\n";

  s << "## Singles\n\n| channel | counts | rate (1/s) | drift χ²/dof | p | relative slope (1/s) |\n|---|---|---|---|---|---|\n";
  for (const auto& c : a.singles.channels) {
    auto i = h.channel_index(static_cast<records::ChannelId>(c.channel));
    std::snprintf(buf, sizeof buf, "| %s | %llu | %.6g ± %.2g | %.1f/%d | %.3g | %.3g ± %.2g |\n",
                  i ? h.channels[*i].name.c_str() : "?", static_cast<unsigned long long>(c.counts), c.rate_per_s,
                  c.rate_err_per_s, c.drift_chi2, c.drift_dof, c.drift_p_value, c.drift_slope_per_s, c.drift_slope_err_per_s);
    s << buf;
  }
  s << "\nDrift: counts in " << a.singles.options.slices
    << " equal time slices, Pearson χ² test of a constant rate (small p: the rate drifted).\n\n";
  s << figure("singles", "singles rate per time slice");

  s << "## Correlations\n\n";
  for (const auto& p : a.pairs) {
    s << "### " << p.start_name << " → " << p.stop_name << " (" << p.kind << ")\n\n";
    std::snprintf(buf, sizeof buf, "N_start = %llu, N_stop = %llu, accidentals per bin %.4g. ",
                  static_cast<unsigned long long>(p.histogram.n_start_used), static_cast<unsigned long long>(p.histogram.n_stop),
                  p.histogram.expected_counts_per_bin);
    s << buf << p.fit_message << ".\n\n";
    if (p.fit) {
      std::snprintf(buf, sizeof buf, "χ²/dof = %.1f/%d, p = %.3g, fit start τ = %.4g ns.\n\n", p.fit->fit.chi2, p.fit->fit.dof,
                    p.fit->fit.p_value, p.fit->tau_us.empty() ? 0.0 : p.fit->tau_us.front() * 1e3);
      s << buf << "| parameter | value |\n|---|---|\n";
      for (std::size_t i = 0; i < p.fit->fit.parameters.size(); ++i)
        s << "| " << p.fit->fit.parameter_names[i] << " | "
          << pm(Estimate{p.fit->fit.parameters[i], p.fit->fit.standard_errors[i]}, "") << " |\n";
      s << "\n";
      if (p.beat_contrast) s << "Beat contrast (amplitude / level): " << pm(p.beat_contrast, "") << ". ";
      if (p.field) s << "B from this pair: " << pm(Estimate{p.field->field_G, p.field->field_err_G}, "G") << ". ";
      if (p.atoms_effective) s << "N_eff from this pair: " << pm(p.atoms_effective, "") << ". ";
      if (p.transit_us) s << "Transit time from this pair: " << pm(p.transit_us, "µs") << ". ";
      if (!p.jackknife_message.empty()) s << "(" << p.jackknife_message << ": fit errors only.) ";
      else {
        auto jk = [&](const char* name, const std::optional<Estimate>& e) {
          if (!e) return;
          char b2[160];
          std::snprintf(b2, sizeof b2, "%s fit σ %.3g, jackknife σ %.3g; ", name, e->fit_std_error, e->jackknife_std_error);
          s << b2;
        };
        s << "Errors: ";
        jk("beat frequency", p.beat_MHz);
        jk("N_eff", p.atoms_effective);
        jk("τ_t", p.transit_us);
      }
      s << "\n\n";
      s << figure(pair_label(p), "g2 " + p.start_name + " → " + p.stop_name + ", fit and residuals");
    }
  }
  const auto prov = current_provenance();
  s << "---\nWritten by " << prov.version << " on " << prov.host << " at " << prov.date_utc << ": `"
    << prov.command_line << "`.\n";
  return s.str();
}

}  // namespace flyby::analysis
