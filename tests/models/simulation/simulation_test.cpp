// Tests of the scenario assembly and `flyby simulate` (models/simulation, tools/flyby/cmd_simulate.cpp).
#include <catch2/catch.hpp>
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>

#include "engine/records/record_reader.h"
#include "models/config/scenario_config.h"
#include "models/simulation/simulation.h"
#include "tests/support/run_cli.h"
#include "tests/support/scenario_text.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

namespace {

using flyby::test::run_flyby;
using flyby::test::ScratchDir;

std::string write(const ScratchDir& d, const std::string& name, const std::string& text) {
  std::ofstream((d / name).string()) << text;
  return (d / name).string();
}

std::size_t count_channel(const flyby::records::RecordData& r, const std::string& name) {
  const auto idx = r.header.channel_index(name);
  REQUIRE(idx.has_value());
  const auto id = r.header.channels[*idx].id;
  std::size_t n = 0;
  for (auto c : r.tags.channel) n += (c == id);
  return n;
}

// An empty resonator (the only atom sits far outside every element) driven on mode 1.
std::string empty_resonator_config(std::uint64_t seed, const std::string& source, double duration_s) {
  return R"(
[atom]
species = "Rb87"
ground_F = 2
excited_F = 3
[field]
B_G = [0, 0, 3.0]
)" + flyby::test::probed_resonator_text({3.0, 0.02, "fock_cutoff_count = 3\n"}) +
         flyby::test::pbs_channel_text("H", 0) + flyby::test::pbs_channel_text("V", 90) + R"([run]
duration_s = )" + std::to_string(duration_s) + "\nseed_id = " + std::to_string(seed) + "\n" + source;
}

}  // namespace

TEST_CASE("empty driven resonator gives Poisson clicks at the coherent-state rate", "[simulate]") {
  // A coherent state |α⟩ is an eigenstate of a, so its photodetection is a Poisson process of
  // rate 2κ T η |α|² (R. J. Glauber, Phys. Rev. 131, 2766 (1963); R. Loudon, "The Quantum Theory
  // of Light", ch. 6) [memory]. Empty resonator on resonance: n̄ = (E/κ)² = 0.02 here.
  const auto seed = flyby::test::seed("simulate empty resonator");
  ScratchDir d("sim-empty");
  // Two ways to an empty resonator: a beam so dilute that no atom comes (the Poisson clicks are
  // generated directly), and one stationary atom far outside the mode (the trajectory engine
  // integrates the driven modes, started in the coherent state, for the whole run).
  const bool direct = GENERATE(true, false);
  const std::string source = direct ? R"(
[source]
kind = "beam"
speed_distribution = "monochromatic"
speed_m_per_s = 10.0
transverse_profile = "gaussian"
transverse_sigma_um = 10
axial_extent_um = 10
flux_per_s = 1e-6
)" : R"(
[source]
kind = "stationary"
positions_um = [[0, 5000, 0]]
)";
  const std::string cfg = write(d, "c.toml", empty_resonator_config(seed, source, direct ? 0.05 : 0.002));
  const auto s = flyby::config::check_scenario(flyby::config::load_config_file(cfg));
  flyby::simulation::Options o;
  o.output_path = (d / "run.h5").string();
  const auto sum = flyby::simulation::simulate(s, o);
  INFO(sum.full_report());
  REQUIRE(sum.ok);
  CHECK((sum.empty_interval_photons > 0) == direct);
  const auto rec = flyby::records::read_record(o.output_path);
  const double kappa = 2 * M_PI * 3.0;                         // rad/µs
  const double rate_per_us = 2 * kappa * 0.7 * 0.6 * 0.02;     // 2κ T η n̄
  const double D_us = (direct ? 0.05 : 0.002) * 1e6;
  const double mean = rate_per_us * D_us;
  const double n = double(count_channel(rec, "H"));
  REQUIRE(std::isfinite(n));
  CHECK(std::abs(n - mean) < 5.0 * std::sqrt(mean));           // 5 σ of a Poisson count
  CHECK(count_channel(rec, "V") == 0);                          // mode 2 is not driven

  // Variance: counts in 1000 bins; for Poisson the sample variance s² has mean μ and
  // Var(s²) ≈ (μ + 2μ²)/n (fourth central moment μ + 3μ²) — check s² = μ within 5 σ.
  const int bins = 1000;
  std::vector<double> k(bins, 0.0);
  const auto H = rec.header.channels[*rec.header.channel_index("H")].id;
  for (std::size_t i = 0; i < rec.tags.size(); ++i)
    if (rec.tags.channel[i] == H) k[std::size_t(double(rec.tags.time_ps[i]) / (D_us * 1e6) * bins)] += 1.0;
  double m = 0, s2 = 0;
  for (int i = 0; i < bins; ++i) {  // Welford
    const double dx = k[i] - m;
    m += dx / (i + 1);
    s2 += dx * (k[i] - m);
  }
  s2 /= bins - 1;
  const double mu = mean / bins;
  REQUIRE(std::isfinite(s2));
  CHECK(std::abs(s2 - mu) < 5.0 * std::sqrt((mu + 2 * mu * mu) / bins));
}

TEST_CASE("a sigma+ analyzer port is blind to a pure sigma- transition, a linear port is not", "[simulate]") {
  // Angular momentum selection rules (DESIGN.md §3, Condon–Shortley; common practice): an atom
  // with B along the resonator axis driven σ− from F=0 can only reach m′ = −1, whose decay to
  // m = 0 emits σ− light. The σ+ port projects the two linear modes' fields onto e₊₁ and sees
  // their destructive interference — zero photons, although each linear mode carries the light.
  const auto seed = flyby::test::seed("simulate sigma blind");
  ScratchDir d("sim-blind");
  const std::string cfg = write(d, "c.toml", R"(
[atom]
species = "custom"
ground_F = 0
excited_F = 1
gamma_MHz = 6.0
wavelength_nm = 780.0
ground_gF = 0.0
excited_gF = 0.67
[field]
B_G = [0, 0, 2.0]
[resonator]
length_mm = 0.5
waist_um = 30.0
kappa_MHz = 5.0
mode1_angle_deg = 30
splitting_MHz = 0.4
output_mirror_fraction = 1.0
fock_cutoff_count = 2
[[drive]]
name = "pump"
kind = "side"
direction_dir = [0, 0, 1]
polarization = "sigma_minus"
waist_um = 20.0
rabi_MHz = 3.0
[[channel]]
name = "sigma_plus"
source = "resonator"
analyzer = "circ"
polarization = "sigma_plus"
efficiency_fraction = 0.5
[[channel]]
name = "sigma_minus"
source = "resonator"
analyzer = "circ"
polarization = "sigma_minus"
efficiency_fraction = 0.5
[[channel]]
name = "H"
source = "resonator"
analyzer = "lin"
polarization = "linear"
polarization_angle_deg = 0
efficiency_fraction = 0.5
[source]
kind = "stationary"
positions_um = [[0, 0, 0]]
[run]
duration_s = 0.0002
seed_id = )" + std::to_string(seed) + "\n");
  const auto r = run_flyby("simulate c.toml -o run.h5 --json", d.path().string());
  INFO(r.err);
  REQUIRE(r.status == 0);
  const auto rec = flyby::records::read_record((d / "run.h5").string());
  const std::size_t minus = count_channel(rec, "sigma_minus"), lin = count_channel(rec, "H");
  CHECK(count_channel(rec, "sigma_plus") == 0);
  // The σ− and H ports must see light: more than 5 σ above zero of their own Poisson count.
  CHECK(double(minus) > 25.0);
  CHECK(double(lin) > 25.0);
}

TEST_CASE("simulate: 1 and 2 threads give bit-identical records", "[simulate]") {
  const auto seed = flyby::test::seed("simulate threads");
  ScratchDir d("sim-threads");
  const std::string cfg = std::string(FLYBY_SOURCE_DIR) + "/configs/thermal_beam_resonator.toml";
  const std::string common = "simulate '" + cfg + "' --duration-s 0.0001 --seed " + std::to_string(seed);
  const auto r1 = run_flyby(common + " -o a.h5 --threads 1", d.path().string());
  const auto r2 = run_flyby(common + " -o b.h5 --threads 2", d.path().string());
  INFO(r1.err << r2.err);
  REQUIRE(r1.status == 0);
  REQUIRE(r2.status == 0);
  const auto a = flyby::records::read_record((d / "a.h5").string());
  const auto b = flyby::records::read_record((d / "b.h5").string());
  CHECK(a.tags.size() > 0);
  CHECK(a.tags.time_ps == b.tags.time_ps);
  CHECK(a.tags.channel == b.tags.channel);
  CHECK(a.header.provenance.seed == std::optional<std::uint64_t>(seed));
  CHECK(a.header.provenance.config_text.find("thermal") != std::string::npos);
}

TEST_CASE("simulate error cases: one line, non-zero exit, no output", "[simulate]") {
  ScratchDir d("sim-errors");
  write(d, "bad.toml", "[atom]\nspecies = \"Rb87\"\nground_F = 2\nexcited_F = 3\n[resonator]\nlenght_mm = 1\n");
  for (const std::string& args : std::vector<std::string>{"simulate bad.toml -o x.h5", "simulate missing.toml -o x.h5",
                                 "simulate bad.toml", "simulate '" + std::string(FLYBY_SOURCE_DIR) +
                                     "/configs/stationary_free_space.toml' -o x.h5 --duration-s -1"}) {
    const auto r = run_flyby(args, d.path().string());
    INFO(args << "\n" << r.err);
    CHECK(r.status != 0);
    CHECK(!r.err.empty());
    CHECK(std::count(r.err.begin(), r.err.end(), '\n') <= 2);
    CHECK(!std::filesystem::exists(d / "x.h5"));
  }
  for (const auto& f : d.entries()) CHECK(f.find(".part-") == std::string::npos);
}

namespace {

// Heralded Δm = 2 beats of a stationary 87Rb atom, F = 1 → F′ = 0, B along lab x
// (tests/support/scenario_text.h): the rate of the photon after a click oscillates at the m = ±1
// beat frequency.
std::string beat_config(std::uint64_t seed, double field_G, double duration_s, double rabi_MHz,
                        const std::string& extra) {
  flyby::test::BeatScenario o;
  o.seed = seed;
  o.field_G = field_G;
  o.duration_s = duration_s;
  o.rabi_MHz = rabi_MHz;
  o.solid_angle_sr = 2.0;
  o.extra_tables = extra;
  return flyby::test::beat_scenario_text(o);
}

// Delays in [min_us, max_us) from every tag to the later tags, µs.
std::vector<double> delays_us(const std::vector<std::int64_t>& t_ps, double min_us, double max_us) {
  std::vector<double> d;
  for (std::size_t i = 0; i < t_ps.size(); ++i)
    for (std::size_t j = i + 1; j < t_ps.size() && double(t_ps[j] - t_ps[i]) * 1e-6 < max_us; ++j)
      if (double(t_ps[j] - t_ps[i]) * 1e-6 >= min_us) d.push_back(double(t_ps[j] - t_ps[i]) * 1e-6);
  return d;
}

// Frequency (MHz) of the largest periodogram value |Σ e^{2πifτ}|² of the delays in [lo, hi] MHz.
double periodogram_peak_MHz(const std::vector<double>& tau, double lo, double hi) {
  auto power = [&](double f) {
    std::complex<double> s = 0;
    for (double t : tau) s += std::exp(std::complex<double>(0, 2 * M_PI * f * t));
    return std::norm(s);
  };
  double best = lo, pbest = -1;
  const int n = 400;
  for (int k = 0; k <= n; ++k) {
    const double f = lo + (hi - lo) * k / n;
    const double p = power(f);
    if (p > pbest) pbest = p, best = f;
  }
  double a = best - (hi - lo) / n, b = best + (hi - lo) / n;  // golden-section refinement
  for (int it = 0; it < 40; ++it) {
    const double m1 = b - 0.618034 * (b - a), m2 = a + 0.618034 * (b - a);
    if (power(m1) > power(m2)) b = m2; else a = m1;
  }
  return 0.5 * (a + b);
}

}  // namespace

TEST_CASE("heralded beat frequency between m = ±1 equals 2 g_F μB B / h", "[simulate]") {
  // Beat frequency between m = ±1 of one ground level is 2 g_F μB B/h (REFERENCES.md, facts of
  // the trade: common practice, no source). The probe is weak (Ω/2π = 0.7 MHz): a resonant drive
  // of the Λ system shifts the heralded beat (+2.7 % measured at Ω/2π = 2 MHz, scaling as Ω²).
  // g_F(87Rb F=1) = −0.5018267 (REFERENCES.md [derived]
  // from Steck's 87Rb D line data), μB/h = 1.39962449361 MHz/G (CODATA 2018).
  const auto seed = flyby::test::seed("simulate beat frequency");
  const double B = 2.0;
  const double f0 = 2 * 0.5018267 * 1.39962449361 * B;  // MHz
  ScratchDir d("sim-beat");
  const auto cfg = write(d, "c.toml", beat_config(seed, B, 4.0, 0.7, ""));
  const auto s = flyby::config::check_scenario(flyby::config::load_config_file(cfg));
  flyby::simulation::Options o;
  o.output_path = (d / "run.h5").string();
  const auto sum = flyby::simulation::simulate(s, o);
  REQUIRE(sum.ok);
  const auto rec = flyby::records::read_record(o.output_path);
  // Independent batches in time: the spread of their estimates gives the standard error.
  const int K = 10;
  const std::int64_t span = rec.header.duration_ps / K;
  std::vector<double> f;
  for (int k = 0; k < K; ++k) {
    std::vector<std::int64_t> t;
    for (auto x : rec.tags.time_ps)
      if (x >= k * span && x < (k + 1) * span) t.push_back(x);
    // Window of 6 beat periods after the first: the flat background's transform vanishes at f0,
    // and the antibunching dip at τ ≈ 0 is left out.
    f.push_back(periodogram_peak_MHz(delays_us(t, 1.0 / f0, 7.0 / f0), 0.7 * f0, 1.3 * f0));
  }
  double m = 0, v = 0;
  for (int k = 0; k < K; ++k) {
    const double dx = f[k] - m;
    m += dx / (k + 1);
    v += dx * (f[k] - m);
  }
  const double se = std::sqrt(v / (K - 1) / K);
  INFO("tags " << rec.tags.size() << ", f = " << m << " ± " << se << " MHz, expected " << f0);
  REQUIRE(std::isfinite(m));
  REQUIRE(std::isfinite(se));
  CHECK(std::abs(m - f0) < 5 * se + 1e-6 * f0);
  CHECK(se < 0.05 * f0);  // the batches resolve the beat at all (else the check above is empty)
}

namespace {

// Beat contrast 2|Σ_k e^{2πi f τ_k}| / N of the heralded delays τ_k in [lo, hi) (the relative
// amplitude of the cos(2πfτ) modulation of the delay histogram), per time batch.
std::vector<double> batch_contrasts(const flyby::records::RecordData& rec, double f, double lo, double hi, int K) {
  const std::int64_t span = rec.header.duration_ps / K;
  std::vector<double> c;
  for (int k = 0; k < K; ++k) {
    std::vector<std::int64_t> t;
    for (auto x : rec.tags.time_ps)
      if (x >= k * span && x < (k + 1) * span) t.push_back(x);
    const auto tau = delays_us(t, lo, hi);
    std::complex<double> s = 0;
    for (double x : tau) s += std::exp(std::complex<double>(0, 2 * M_PI * f * x));
    c.push_back(tau.empty() ? 0.0 : 2 * std::abs(s) / double(tau.size()));
  }
  return c;
}

std::pair<double, double> mean_and_standard_error(const std::vector<double>& x) {
  double m = 0, v = 0;
  for (std::size_t k = 0; k < x.size(); ++k) {  // Welford
    const double dx = x[k] - m;
    m += dx / double(k + 1);
    v += dx * (x[k] - m);
  }
  return {m, std::sqrt(v / double(x.size() - 1) / double(x.size()))};
}

}  // namespace

TEST_CASE("feedback that switches the scattering drive off after a herald raises the beat contrast", "[simulate]") {
  // Click-triggered switching of the drive after a herald raises the contrast of ground-state
  // beats (up to about 2× when drive-induced scattering dominates their decay): REFERENCES.md,
  // facts of the trade (common practice, no source). Here a strong 'scatter' drive dephases the
  // m = ±1 superposition the herald prepares; the rule switches it off for 3 µs after each
  // click, so the weak probe reads the beat undisturbed. Direction asserted with 5 standard
  // errors of the batch means; the ratio is printed.
  const auto seed = flyby::test::seed("simulate feedback contrast");
  const double B = 2.0, f0 = 2 * 0.5018267 * 1.39962449361 * B;
  const std::string scatter = R"(
[[drive]]
name = "scatter"
kind = "side"
direction_dir = [0, 0, 1]
polarization = "linear"
polarization_dir = [1, 1, 0]
waist_um = 50.0
rabi_MHz = 4.0
)";
  const std::string rule = R"(
[[feedback]]
name = "scatter_off"
trigger_channel = "det"
drive = "scatter"
latency_ns = 20
level_ratio = 0.0
duration_ns = 3000
holdoff_ns = 3100
)";
  ScratchDir d("sim-feedback");
  std::vector<flyby::records::RecordData> recs;
  for (const std::string& extra : {scatter, scatter + rule}) {
    const auto cfg = write(d, "c.toml", beat_config(seed, B, 0.05, 2.0, extra));
    const auto s = flyby::config::check_scenario(flyby::config::load_config_file(cfg));
    flyby::simulation::Options o;
    o.output_path = (d / "run.h5").string();
    REQUIRE(flyby::simulation::simulate(s, o).ok);
    recs.push_back(flyby::records::read_record(o.output_path));
  }
  // Delays from 1/f0 to 7/f0 (< latency + duration): 6 full periods, flat background cancels.
  const auto [c_off, se_off] = mean_and_standard_error(batch_contrasts(recs[0], f0, 1 / f0, 7 / f0, 10));
  const auto [c_fb, se_fb] = mean_and_standard_error(batch_contrasts(recs[1], f0, 1 / f0, 7 / f0, 10));
  INFO("contrast without feedback " << c_off << " ± " << se_off << ", with " << c_fb << " ± " << se_fb
                                    << ", ratio " << c_fb / c_off);
  REQUIRE(std::isfinite(c_off));
  REQUIRE(std::isfinite(c_fb));
  CHECK(c_fb - c_off > 5 * std::sqrt(se_off * se_off + se_fb * se_fb));
  INFO("beat contrast ratio with/without feedback: " << c_fb / c_off);
}
