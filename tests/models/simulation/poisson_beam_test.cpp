// Poisson beams of independent emitters through `flyby simulate`: the photon correlation of a
// monochromatic beam of two-level atoms crossing a side drive, at mean effective atom numbers
// 0.1 to 5, against the multi-atom and transit-time form g2(τ) = 1 + g2_1(τ)·env(τ)/N_eff
// (H. J. Kimble, M. Dagenais and L. Mandel, Phys. Rev. A 18, 201 (1978) [memory]; REFERENCES.md
// "Many emitters"). The envelope and N_eff come from Campbell's theorem for a Poisson shot-noise
// process (S. O. Rice, Bell Syst. Tech. J. 23, 282 (1944) [memory]): atoms arrive at rate R, each
// radiates I(t) ∝ ρee(Ω(t)) along its path, so g2(τ) − 1 = R∫I(t)I(t+τ)dt / (R∫I dt)² for τ ≫ 1/Γ
// (where g2_1 → 1), and g2(0) = 1 + g2_1(0)/N_eff = 1 (a two-level atom never emits two photons
// at once: g2_1(0) = 0, Kimble & Mandel, Phys. Rev. A 13, 2123 (1976)). ρee(Ω) is the two-level
// steady state (Loudon; REFERENCES.md), adiabatic along the path (transit 2 µs ≫ 1/Γ = 27 ns).
#include <catch2/catch.hpp>
#include <cmath>
#include <array>
#include <fstream>

#include "engine/records/record_reader.h"
#include "models/config/scenario_config.h"
#include "models/simulation/simulation.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/scenario_text.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

namespace {

using flyby::test::ScratchDir;

constexpr double kGammaMHz = 6.0, kRabiMHz = 3.0, kWaistUm = 10.0, kSpeed = 5.0;  // T = w/v = 2 µs

// I(t) ∝ ρee(Ω0 e^{−(vt)²/w²}) on resonance (Loudon; REFERENCES.md), t in µs.
double intensity(double t_us) {
  const double gamma = 2 * M_PI * kGammaMHz;
  const double x_um = kSpeed * t_us;  // m/s = µm/µs
  const double om = 2 * M_PI * kRabiMHz * std::exp(-x_um * x_um / (kWaistUm * kWaistUm));
  return (om * om / 4) / (om * om / 2 + gamma * gamma / 4);
}

// ∫ I(t) I(t+τ) dt by the trapezoid rule on [−12, 12] µs (I < 1e-30 outside).
double overlap(double tau) {
  const double h = 1e-3;
  double s = 0;
  for (double t = -12; t <= 12; t += h) s += intensity(t) * intensity(t + tau);
  return s * h;
}

// A line of two-level atoms (σ = 10 nm across) in a 1 G field along the drive polarization, so
// the drive is π (tests/support/scenario_text.h).
std::string config(std::uint64_t seed, double flux_per_s, double duration_s) {
  flyby::test::BeamScenario o;
  o.seed = seed;
  o.duration_s = duration_s;
  o.flux_per_s = flux_per_s;
  o.speed_m_per_s = kSpeed;
  o.waist_um = kWaistUm;
  o.rabi_MHz = kRabiMHz;
  o.gamma_MHz = kGammaMHz;
  o.excited_gF = 0.5;
  o.field_G = 1.0;
  o.slit_width_um.reset();
  o.transverse_sigma_um = 0.01;
  o.axial_extent_um = 0;
  return flyby::test::beam_scenario_text(o);
}

}  // namespace

TEST_CASE("Poisson beams: g2(0) and the transit envelope follow the multi-atom formula", "[simulate][atoms][kdm]") {
  const double norm = overlap(0.0);
  double area = 0;
  for (double t = -12; t <= 12; t += 1e-3) area += intensity(t) * 1e-3;
  // N_eff = R (∫I)² / ∫I²  (the bump height at τ → 0⁺ is 1/N_eff).
  const double n_eff_per_rate_us = area * area / norm;
  for (double n_eff : {0.1, 1.0, 5.0}) {
    const double rate_per_us = n_eff / n_eff_per_rate_us;
    // Cost ∝ atoms × transit ∝ N_eff × duration: ≈ 1.5 s CPU per case in Release. The N_eff = 5
    // case is not scaled down (FLYBY_TEST_SCALE): below 3 ms its envelope (height 0.2) is not
    // resolved at 5 standard errors.
    const double duration_s = n_eff < 0.5 ? flyby::test::test_scale() * 0.1 : n_eff < 2 ? flyby::test::test_scale() * 0.01 : 0.003;
    INFO("N_eff " << n_eff << ", flux " << rate_per_us * 1e6 << " /s, duration " << duration_s << " s");
    ScratchDir d("poisson-beam");
    const std::string path = (d / "run.h5").string();
    const auto sum = flyby::test::simulate_text(config(flyby::test::seed("poisson beam"), rate_per_us * 1e6, duration_s), "poisson beam", path, 0);
    INFO(sum.full_report());
    REQUIRE(sum.ok);
    CHECK(sum.exact_clusters + sum.uncoupled_clusters == sum.clusters);
    CHECK(sum.fallback_clusters == 0u);
    const auto rec = flyby::records::read_record(path);
    const auto& t = rec.tags.time_ps;
    const double D_us = duration_s * 1e6;
    REQUIRE(t.size() > 100);
    // Windows of the delay τ (one-sided): A ≈ g2(0) (2 ns ≪ 1/Γ), B and C on the transit
    // envelope (τ ≫ 1/Γ, where g2_1 = 1).
    struct Window { double a, b; };
    const Window win[3] = {{0.0, 0.002}, {0.2, 1.0}, {1.6, 2.6}};
    auto model = [&](const Window& w, bool envelope) {  // ⟨g2⟩ over the window
      const int steps = 40;
      double s2 = 0;
      for (int k = 0; k < steps; ++k) {
        const double tau = w.a + (k + 0.5) * (w.b - w.a) / steps;
        s2 += 1 + (envelope ? overlap(tau) / (rate_per_us * area * area) : 0.0);
      }
      return s2 / steps;
    };
    // g2 per batch of start times, normalized by the batch's own singles; the standard error of
    // the mean over batches includes the atom-number fluctuations that correlate all delays.
    const int batches = 20;
    std::vector<std::array<double, 3>> g2b(batches, {0, 0, 0});
    std::vector<double> nb(batches, 0.0);
    for (std::size_t i = 0; i < t.size(); ++i) {
      const int b = std::min(batches - 1, int(double(t[i]) * 1e-6 / D_us * batches));
      nb[std::size_t(b)] += 1;
      for (std::size_t j = i + 1; j < t.size(); ++j) {
        const double tau = double(t[j] - t[i]) * 1e-6;
        if (tau >= win[2].b) break;
        for (int w = 0; w < 3; ++w)
          if (tau >= win[w].a && tau < win[w].b) g2b[std::size_t(b)][std::size_t(w)] += 1;
      }
    }
    const double r = double(t.size()) / D_us;
    for (int w = 0; w < 3; ++w) {
      double m = 0, s2 = 0;
      for (int b = 0; b < batches; ++b) {  // Welford over batches
        const double x = g2b[std::size_t(b)][std::size_t(w)] / (nb[std::size_t(b)] * r * (win[w].b - win[w].a));
        const double dx = x - m;
        m += dx / (b + 1);
        s2 += dx * (x - m);
      }
      const double se = std::sqrt(s2 / (batches - 1) / batches);
      // Window A: g2(0) = 1 for a Poisson number of emitters that cannot emit two photons at
      // once; the single-atom rise g2_1(τ) ≈ (Ωτ/2)²/ρee within 2 ns averages < 2e-3 (× 1/N_eff).
      const double expect = w == 0 ? 1.0 : model(win[w], true);
      INFO("window " << win[w].a << ".." << win[w].b << " us: g2 " << m << " +- " << se << ", expected " << expect
                     << " (no envelope: " << model(win[w], false) << ")");
      REQUIRE(std::isfinite(m));
      REQUIRE(se > 0);
      CHECK(std::abs(m - expect) <= 5 * se);
      // The envelope is resolved: the data exclude g2 = 1 (no atom-number fluctuations).
      if (w == 1) CHECK(m - 1 > 5 * se);
    }
  }
}
