// End-to-end checks of `flyby correlate` and `flyby fit` on a synthetic heralded-beat record:
// the CLI's CSV equals the in-process correlator, the fit recovers the beat frequency the
// record was drawn with, figures are written, and bad input gives one line and a non-zero exit
// with no output left behind.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdlib>
#include <fstream>
#include <nlohmann/json.hpp>
#include <numbers>
#include <sstream>

#include "engine/analysis/correlator.h"
#include "engine/analysis/g2_csv.h"
#include "engine/common/random.h"
#include "engine/records/record_writer.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

using namespace flyby;

namespace {

struct Synthetic {
  double duration_s = 2.0;
  double herald_rate_per_s = 2e4;   // start (herald) clicks
  double background_per_s = 5e4;    // uncorrelated clicks in det_a
  double emit_probability = 0.5;    // a herald is followed by a det_a click with this probability
  double decay_us = 1.0, beat_MHz = 3.0, visibility = 0.8;
};

// Heralded clicks: delay density ∝ e^{−d/τ}(1 + V cos 2πf d), drawn by rejection; plus Poisson
// background in det_a and an unrelated channel det_b.
records::RecordData make_record(const Synthetic& s, std::uint64_t seed) {
  records::RecordData rec;
  rec.header.channels = {{0, "herald", records::ChannelRole::kHerald},
                         {1, "det_a", records::ChannelRole::kDetector},
                         {2, "det_b", records::ChannelRole::kDetector}};
  rec.header.resolution_ps = 1;
  rec.header.start_ps = 0;
  rec.header.duration_ps = static_cast<std::int64_t>(s.duration_s * 1e12);
  rec.header.provenance = records::current_record_provenance("test", "", seed);
  std::vector<std::pair<std::int64_t, records::ChannelId>> tags;
  auto rng = make_stream(seed, StreamPurpose::kTest, 0);
  auto poisson = [&](double rate, records::ChannelId ch) {
    double t = 0;
    while (true) {
      t += -std::log(uniform_open0(rng)) / rate;
      if (t >= s.duration_s) break;
      tags.emplace_back(static_cast<std::int64_t>(t * 1e12), ch);
    }
  };
  poisson(s.herald_rate_per_s, 0);
  const std::size_t n_herald = tags.size();
  for (std::size_t i = 0; i < n_herald; ++i) {
    if (uniform_open0(rng) > s.emit_probability) continue;
    double d_us = 0;
    do {
      d_us = -s.decay_us * std::log(uniform_open0(rng));
    } while (uniform_open0(rng) * (1 + s.visibility) > 1 + s.visibility * std::cos(2 * std::numbers::pi * s.beat_MHz * d_us));
    const std::int64_t t = tags[i].first + static_cast<std::int64_t>(d_us * 1e6);
    if (t < rec.header.duration_ps) tags.emplace_back(t, 1);
  }
  poisson(s.background_per_s, 1);
  poisson(s.background_per_s, 2);
  std::sort(tags.begin(), tags.end());
  for (const auto& [t, c] : tags) rec.tags.push_back(t, c);
  return rec;
}

int run(const std::string& args, const std::filesystem::path& err_file) {
  const std::string cmd = std::string(FLYBY_EXE) + " " + args + " >/dev/null 2>" + err_file.string();
  const int rc = std::system(cmd.c_str());
  return WIFEXITED(rc) ? WEXITSTATUS(rc) : -1;
}

std::string slurp(const std::filesystem::path& p) {
  std::ifstream f(p);
  std::stringstream ss;
  ss << f.rdbuf();
  return ss.str();
}

}  // namespace

TEST_CASE("flyby correlate and fit recover the beat of a synthetic heralded record", "[cli][correlator][g2fit]") {
  test::ScratchDir dir("analysis-cli");
  const Synthetic s;
  const auto rec = make_record(s, test::seed("analysis cli record"));
  records::write_record(dir / "run.h5", rec);
  const auto err = dir / "stderr.txt";
  const std::string csv = (dir / "g2.csv").string(), fit = (dir / "fit.json").string();

  REQUIRE(run("correlate " + (dir / "run.h5").string() + " --block-tags 5000 --threads 2 --start herald --stop 1 --bin-ns 10 --range-ns 3000 -o " + csv,
              err) == 0);
  const auto back = analysis::read_g2_csv(csv);
  // The CLI's streamed, threaded histogram equals the one-shot in-process correlator.
  analysis::CorrelatorOptions o;
  o.start_channel = 0;
  o.stop_channel = 1;
  o.bin_width_ps = 10000;
  o.range_ps = 3000000;
  o.duration_ps = rec.header.duration_ps;
  {
    analysis::Correlator c(o);
    c.add_chunk(rec.tags.time_ps, rec.tags.channel);
    const auto h = c.finish();
    REQUIRE(back.counts.size() == h.counts.size());
    for (std::size_t b = 0; b < h.counts.size(); ++b) {
      REQUIRE(back.counts[b] == static_cast<double>(h.counts[b]));
      REQUIRE(back.data.g2[b] == h.g2[b]);  // 17 significant digits: exact round trip
      REQUIRE(std::abs(back.data.tau_us[b] * 1e6 - static_cast<double>(h.tau_ps[b])) < 1e-6);
    }
  }
  bool has_command_line = false;
  for (const auto& [k, v] : back.comments) has_command_line = has_command_line || (k == "command_line" && !v.empty());
  REQUIRE(has_command_line);

  // g2 = 1 + a e^{−τ/τd} + a V e^{−τ/τd} cos(2πfτ): model level + transit_exp + beat for τ > 0
  // (the bin centred on τ = 0 holds only its positive half of the signal: left out).
  REQUIRE(run("fit " + csv + " --model level+transit_exp+beat --tau-min-ns 10 -o " + fit, err) == 0);
  const auto j = nlohmann::json::parse(slurp(fit));
  REQUIRE(j["status"] == "converged");
  double f = NAN, sf = NAN, td = NAN, std_td = NAN;
  for (const auto& p : j["parameters"]) {
    if (p["name"] == "beat.freq_MHz") f = p["value"], sf = p["std_error"];
    if (p["name"] == "beat.decay_us") td = p["value"], std_td = p["std_error"];
  }
  REQUIRE(std::isfinite(f));
  REQUIRE(std::isfinite(sf));
  INFO("f = " << f << " +- " << sf << " MHz, decay " << td << " +- " << std_td << " us");
  // Drawn with f = 3 MHz, τ = 1 µs: recovered within 5 reported standard errors.
  REQUIRE(std::abs(f - s.beat_MHz) < 5 * sf);
  REQUIRE(std::abs(td - s.decay_us) < 5 * std_td);
  REQUIRE(j["p_value"].get<double>() > 1e-4);
}

TEST_CASE("flyby correlate and fit write figures", "[cli][plot]") {
  test::ScratchDir dir("analysis-plot");
  const auto rec = make_record(Synthetic{0.3}, test::seed("analysis cli plot"));
  records::write_record(dir / "run.h5", rec);
  const auto err = dir / "stderr.txt";
  REQUIRE(run("correlate " + (dir / "run.h5").string() + " --start herald --stop det_a --bin-ns 20 --range-ns 2000 -o " +
                  (dir / "g2.csv").string() + " --plot " + (dir / "g2.png").string(),
              err) == 0);
  REQUIRE(run("fit " + (dir / "g2.csv").string() + " --model level+transit_exp+beat --tau-min-ns 0 --plot " +
                  (dir / "fit.svg").string(),
              err) == 0);
  // PNG signature (ISO/IEC 15948, first 8 bytes) and an SVG root element.
  const std::string png = slurp(dir / "g2.png");
  REQUIRE(png.size() > 1000);
  REQUIRE(png.substr(0, 8) == std::string("\x89PNG\r\n\x1a\n", 8));
  REQUIRE(slurp(dir / "fit.svg").find("<svg") != std::string::npos);
  // Nothing else left behind: no temporary CSV/JSON/figure parts.
  REQUIRE(dir.entries() == std::vector<std::string>{"fit.svg", "g2.csv", "g2.png", "run.h5", "stderr.txt"});
}

TEST_CASE("flyby correlate and fit refuse bad input with one line and no output", "[cli]") {
  test::ScratchDir dir("analysis-bad");
  const auto err = dir / "stderr.txt";
  const std::string out = (dir / "out.csv").string();
  auto one_line_error = [&] {
    const std::string e = slurp(err);
    return !e.empty() && e.find('\n') == e.size() - 1 && e.find("error") != std::string::npos;
  };
  // Missing record.
  REQUIRE(run("correlate " + (dir / "missing.h5").string() + " --start 0 --stop 1 --bin-ns 1 --range-ns 10 -o " + out, err) != 0);
  REQUIRE(one_line_error());
  // Unknown channel, and a bin width that is not whole ps.
  records::write_record(dir / "run.h5", make_record(Synthetic{0.01}, 1));
  REQUIRE(run("correlate " + (dir / "run.h5").string() + " --start nosuch --stop 1 --bin-ns 1 --range-ns 10 -o " + out, err) != 0);
  REQUIRE(one_line_error());
  REQUIRE(slurp(err).find("det_a") != std::string::npos);  // the message lists the channels
  REQUIRE(run("correlate " + (dir / "run.h5").string() + " --start 0 --stop 1 --bin-ns 0.0005 --range-ns 10 -o " + out, err) != 0);
  REQUIRE(one_line_error());
  // Malformed CSV for fit: a non-number in a row.
  {
    std::ofstream f(dir / "bad.csv");
    f << "# x: y\ntau_ns,counts,g2,g2_err\n0,1,1,1\n1,2,abc,1\n";
  }
  REQUIRE(run("fit " + (dir / "bad.csv").string() + " -o " + (dir / "fit.json").string(), err) != 0);
  REQUIRE(one_line_error());
  REQUIRE(slurp(err).find("bad.csv:4") != std::string::npos);
  REQUIRE(run("fit " + (dir / "bad.csv").string() + " --model level+wiggle", err) != 0);
  REQUIRE(one_line_error());
  REQUIRE(dir.entries() == std::vector<std::string>{"bad.csv", "run.h5", "stderr.txt"});
}

TEST_CASE("a CSV export and re-import of a record gives the identical g2", "[cli][correlator]") {
  // The measured-data path (flyby import) must feed the analysis exactly like the original
  // record: compare every data row of the two correlation CSVs (comments hold dates and paths).
  test::ScratchDir dir("analysis-roundtrip");
  records::write_record(dir / "run.h5", make_record(Synthetic{0.2}, test::seed("analysis cli roundtrip")));
  const auto err = dir / "stderr.txt";
  REQUIRE(run("export " + (dir / "run.h5").string() + " --csv -o " + (dir / "tags.csv").string(), err) == 0);
  REQUIRE(run("import " + (dir / "tags.csv").string() + " -o " + (dir / "back.h5").string(), err) == 0);
  auto rows = [&](const std::string& rec, const std::string& out) {
    REQUIRE(run("correlate " + (dir / rec).string() + " --start herald --stop det_a --bin-ns 5 --range-ns 2000 -o " +
                    (dir / out).string(),
                err) == 0);
    std::ifstream f(dir / out);
    std::string line, body;
    while (std::getline(f, line))
      if (line.empty() || line[0] != '#') body += line + "\n";
    return body;
  };
  const std::string a = rows("run.h5", "a.csv"), b = rows("back.h5", "b.csv");
  REQUIRE(a.size() > 1000);
  REQUIRE(a == b);
}

TEST_CASE("flyby plan prints the Fisher-information plan as JSON", "[cli][plan]") {
  test::ScratchDir dir("analysis-plan");
  const auto out = dir / "plan.json", err = dir / "stderr.txt";
  // shared/REFERENCES.md [derived]: 1000 bins of 10 ns, 1000 counts/bin (rates √(1000/W) per s),
  // contrast 0.05, f = 1 MHz, undamped: σ_f = 1565.5 Hz after the integration giving those counts.
  const std::string rate = "316227.76601683794";  // √(1000 / 1e-8 s)
  const std::string cmd = std::string(FLYBY_EXE) + " plan --singles-per-s " + rate +
                          " --bin-ns 10 --range-ns 10000 --contrast 0.05 --beat-MHz 1 --target beat-freq-kHz=0.5 --json > " +
                          out.string() + " 2>" + err.string();
  REQUIRE(std::system(cmd.c_str()) == 0);
  const auto j = nlohmann::json::parse(slurp(out));
  const double s = j["sigma_freq_kHz_at_1s"];
  REQUIRE(std::abs(s * 1e3 - 1565.5) < 0.05);
  // Time for σ_f = 0.5 kHz: (σ_1s / 0.5 kHz)² seconds.
  REQUIRE(std::abs(j["targets"][0]["duration_s"].get<double>() / std::pow(s / 0.5, 2) - 1) < 1e-12);
  // Missing rates and an unknown target are input errors.
  REQUIRE(run("plan --bin-ns 10 --range-ns 10000 --contrast 0.05 --beat-MHz 1 --target beat-freq-kHz=0.5", err) == 2);
  REQUIRE(run("plan --singles-per-s 1e5 --bin-ns 10 --range-ns 10000 --contrast 0.05 --beat-MHz 1 --target speed=3", err) == 2);
}

TEST_CASE("flyby correlate time slices partition the starts", "[cli][correlator]") {
  // Slices I/N restrict the starts to disjoint windows that cover the record, so their pair
  // counts add up to the unrestricted histogram bin by bin (a property of the definition).
  test::ScratchDir dir("analysis-slices");
  records::write_record(dir / "run.h5", make_record(Synthetic{0.2}, test::seed("analysis cli slices")));
  const auto err = dir / "stderr.txt";
  auto counts = [&](const std::string& extra, const std::string& out) {
    REQUIRE(run("correlate " + (dir / "run.h5").string() + " --start herald --stop det_a --bin-ns 10 --range-ns 1000 " +
                    extra + " -o " + (dir / out).string(),
                err) == 0);
    return analysis::read_g2_csv(dir / out).counts;
  };
  const auto all = counts("", "all.csv");
  const auto a = counts("--slice 1/3", "s1.csv"), b = counts("--slice 2/3", "s2.csv"), c = counts("--slice 3/3", "s3.csv");
  double total = 0;
  for (std::size_t k = 0; k < all.size(); ++k) {
    REQUIRE(a[k] + b[k] + c[k] == all[k]);
    total += all[k];
  }
  REQUIRE(total > 0);
  // A herald condition on an unrelated channel keeps only a fraction of the starts.
  REQUIRE(run("correlate " + (dir / "run.h5").string() +
                  " --start herald --stop det_a --bin-ns 10 --range-ns 1000 --herald det_b --herald-max-ns 5000 -o " +
                  (dir / "h.csv").string(),
              err) == 0);
  const auto h = analysis::read_g2_csv(dir / "h.csv");
  std::uint64_t n_start = 0, n_seen = 0;
  for (const auto& [k, v] : h.comments) {
    if (k == "n_start") n_start = std::stoull(v);
    if (k == "n_start_seen") n_seen = std::stoull(v);
  }
  REQUIRE(n_seen > 0);
  REQUIRE(n_start < n_seen);
  REQUIRE(n_start > 0);
  REQUIRE(run("correlate " + (dir / "run.h5").string() + " --start herald --stop det_a --bin-ns 10 --range-ns 1000 --slice 4/3",
              err) == 2);
}
