// Atomic beam and arrivals: effusive speed moments, the density-weighted speed of atoms present,
// Poisson arrival statistics, reproducibility of windows, interaction intervals, clusters and
// initial populations (models/source). Monte Carlo tolerances are 5 standard errors of the sample.
#include <catch2/catch.hpp>
#include <cmath>
#include <numbers>

#include "engine/common/errors.h"
#include "models/source/arrivals.h"
#include "models/source/initial_populations.h"
#include "models/source/interaction.h"
#include "tests/support/test_seed.h"

using namespace flyby::source;
using flyby::geometry::Vec3;

namespace {
const double kPi = std::numbers::pi;
const double kRb87Mass_u = 86.909180520;  // Steck [memory], REFERENCES.md

struct Stats {  // Welford
  long n = 0;
  double mean = 0, m2 = 0;
  void add(double x) {
    ++n;
    const double d = x - mean;
    mean += d / n;
    m2 += d * (x - mean);
  }
  double var() const { return m2 / (n - 1); }
  double sem() const { return std::sqrt(var() / n); }
};

BeamSpec rb87_beam() {
  BeamSpec b;
  b.speed.kind = SpeedKind::kEffusive;
  b.speed.oven_temperature_K = 400;
  b.speed.mass_u = kRb87Mass_u;
  b.slit_width_um = 200;
  b.axial_extent_um = 100;
  b.flux_per_s = 2e6;
  return b;
}
}  // namespace

TEST_CASE("effusive speeds: moments of v³exp(−v²/α²) vs Ramsey", "[scenario][source]") {
  // N. F. Ramsey, "Molecular Beams" (1956), ch. II [memory]; [derived] values for 87Rb at 400 K
  // from shared/REFERENCES.md: α = 276.649 m/s, ⟨v⟩ = 367.761 m/s, v_rms = 391.241 m/s.
  SpeedSpec s = rb87_beam().speed;
  CHECK(std::abs(effusive_alpha_m_per_s(400, kRb87Mass_u) - 276.649) < 1e-3);
  CHECK(std::abs(mean_speed_m_per_s(s) - 367.761) < 1e-3);
  auto rng = flyby::make_stream(flyby::test::seed("effusive speeds"), flyby::StreamPurpose::kTest, 1);
  Stats v, v2, inv;
  for (int i = 0; i < 200000; ++i) {
    const double x = sample_speed(s, rng);
    REQUIRE(std::isfinite(x));
    v.add(x);
    v2.add(x * x);
    inv.add(1.0 / x);
  }
  CHECK(std::abs(v.mean - 367.761) < 5 * v.sem());
  CHECK(std::abs(v2.mean - 391.241 * 391.241) < 5 * v2.sem());
  // Density-weighted mean (atoms present at an instant ∝ flux/v): 1/⟨1/v⟩_flux = 2α/√π.
  CHECK(std::abs(mean_inverse_speed_s_per_m(s) - std::sqrt(kPi) / (2 * 276.649)) < 1e-8);
  CHECK(std::abs(inv.mean - std::sqrt(kPi) / (2 * 276.649)) < 5 * inv.sem());
}

TEST_CASE("atoms present at an instant: Poisson number N̄ and density-weighted speed 2α/√π", "[scenario][source]") {
  // End to end through BeamArrivals: count the atoms within ρ < w0 of the resonator axis at many
  // instants. Their number is Poisson with mean N̄ = mean_atoms_in_mode (arrivals.h) and their
  // speeds are density-weighted, mean 2α/√π = 312.160 m/s (REFERENCES.md, [derived]).
  BeamSpec b = rb87_beam();
  const double w0 = 30;
  const double rate = arrival_rate_per_us(b, w0);
  const double nbar = mean_atoms_in_mode(b, *b.flux_per_s, w0);
  // Slit 200 µm ≥ 2 w0: ⟨chord⟩ = π w0²/W exactly; N̄ = R π w0²/W · √π/(2α).
  CHECK(std::abs(nbar - 2e6 * kPi * 900 / 200 * 1e-6 * std::sqrt(kPi) / (2 * 276.649)) < 1e-6 * nbar);
  BeamArrivals arr(b, rate, {GaussianTube{Vec3::Zero(), Vec3::UnitZ(), w0}},
                   {1.0}, flyby::test::seed("atoms present"));
  Stats count, speed;
  const double spacing_us = 50;
  const int instants = 4000;
  const auto atoms = arr.window(0, spacing_us * instants);
  // Index atoms by the instants at which they are inside the w0 cylinder.
  std::vector<int> n(instants, 0);
  for (const auto& a : atoms) {
    const Vec3 v = a.velocity_m_per_s;
    const double vp2 = v.x() * v.x() + v.y() * v.y();
    const Vec3 p = a.position_um;
    const double t0 = -(p.x() * v.x() + p.y() * v.y()) / vp2;
    const double b2 = p.x() * p.x() + p.y() * p.y() - vp2 * t0 * t0;
    if (b2 >= w0 * w0) continue;
    const double half = std::sqrt((w0 * w0 - b2) / vp2);
    const double t_in = a.t_ref_us + t0 - half, t_out = a.t_ref_us + t0 + half;
    for (long k = std::max(0L, static_cast<long>(std::ceil(t_in / spacing_us)));
         k < instants && k * spacing_us < t_out; ++k) {
      ++n[k];
      speed.add(v.norm());
    }
  }
  for (int k : n) count.add(k);
  CHECK(std::abs(count.mean - nbar) < 5 * count.sem());
  // Poisson: variance = mean (index of dispersion; s² has relative s.d. ≈ √(2/n) for Poisson, plus
  // the excess kurtosis 1/N̄: var(s²) ≈ (2N̄² + N̄)/n).
  CHECK(std::abs(count.var() - nbar) < 5 * std::sqrt((2 * nbar * nbar + nbar) / instants));
  CHECK(std::abs(speed.mean - 2 * 276.649 / std::sqrt(kPi)) < 5 * speed.sem());
}

TEST_CASE("Poisson arrivals: counts per interval have mean = variance = RΔ", "[scenario][source]") {
  BeamSpec b = rb87_beam();
  b.flux_per_s = 3e5;  // 0.3 per µs
  const double rate = arrival_rate_per_us(b, std::nullopt);
  BeamArrivals arr(b, rate, {GaussianTube{Vec3::Zero(), Vec3::UnitZ(), 1e6}}, {1.0},
                   flyby::test::seed("poisson arrivals"));
  // Interval 37 µs is not commensurate with the 100 µs blocks, so block boundaries are crossed.
  const double delta = 37;
  const int m = 5000;
  std::vector<int> n(m, 0);
  for (std::uint64_t k = 0; k * 100.0 < m * delta; ++k) {
    for (const auto& a : arr.block(k)) {
      const auto i = static_cast<long>(a.t_ref_us / delta);
      if (i < m) ++n[i];
    }
  }
  Stats s;
  for (int x : n) s.add(x);
  const double mu = rate * delta;
  CHECK(std::abs(s.mean - mu) < 5 * std::sqrt(mu / m));
  // var(s²) for Poisson ≈ (2μ² + μ)/m.
  CHECK(std::abs(s.var() - mu) < 5 * std::sqrt((2 * mu * mu + mu) / m));
}

TEST_CASE("arrival windows are independent of how the run is cut", "[scenario][source]") {
  BeamSpec b = rb87_beam();
  BeamArrivals arr(b, arrival_rate_per_us(b, 30.0), {GaussianTube{Vec3::Zero(), Vec3::UnitZ(), 30}}, {0.25, 0.75},
                   flyby::test::seed("windows"));
  const auto whole = arr.window(0, 1000);
  auto first = arr.window(0, 430);
  const auto second = arr.window(430, 1000);
  REQUIRE(!whole.empty());
  // Union of the two halves (atoms spanning the cut appear in both) equals the whole, bitwise.
  for (const auto& a : second) {
    bool dup = false;
    for (const auto& x : first) dup = dup || x.id == a.id;
    if (!dup) first.push_back(a);
  }
  REQUIRE(first.size() == whole.size());
  std::sort(first.begin(), first.end(), [](auto& x, auto& y) { return x.t_ref_us < y.t_ref_us; });
  std::vector<Arrival> w = whole;
  std::sort(w.begin(), w.end(), [](auto& x, auto& y) { return x.t_ref_us < y.t_ref_us; });
  for (std::size_t i = 0; i < w.size(); ++i) {
    CHECK(w[i].id == first[i].id);
    CHECK(w[i].t_ref_us == first[i].t_ref_us);
    CHECK(w[i].velocity_m_per_s == first[i].velocity_m_per_s);
    CHECK(w[i].initial_sublevel == first[i].initial_sublevel);
  }
  // Atoms already inside at t = 0 come from the pre-run blocks (negative reference times): at
  // 10⁸ atoms/s about 20 are inside the cutoff region at any instant.
  b.flux_per_s = 1e8;
  BeamArrivals dense(b, arrival_rate_per_us(b, 30.0), {GaussianTube{Vec3::Zero(), Vec3::UnitZ(), 30}}, {1.0},
                     flyby::test::seed("windows"));
  int pre = 0;
  for (const auto& a : dense.window(0, 1)) pre += a.t_ref_us < 0;
  CHECK(pre > 0);
}

TEST_CASE("interaction interval of a straight path through a Gaussian tube", "[scenario][source]") {
  // Envelope exp(−ρ²/w²) > c ⇔ ρ < w√ln(1/c); along a path with impact parameter b at speed v the
  // interval is t* ± √(w² ln(1/c) − b²)/v (elementary geometry).
  const double w = 40, c = 1e-3, v = 250, b = 35;
  GaussianTube tube{Vec3::Zero(), Vec3::UnitZ(), w};
  const auto iv = interaction_interval({tube}, Vec3(0, b, 7), Vec3(v, 0, 0), 10.0, c);
  REQUIRE(iv);
  const double half = std::sqrt(w * w * std::log(1 / c) - b * b) / v;
  CHECK(std::abs(iv->begin_us - (10 - half)) < 1e-12);
  CHECK(std::abs(iv->end_us - (10 + half)) < 1e-12);
  // At the ends the envelope equals the cutoff.
  const double y = b, x = v * (iv->end_us - 10);
  CHECK(std::abs(std::exp(-(x * x + y * y) / (w * w)) - c) < 1e-12);
  // A path that misses, and an atom at rest inside (infinite interval).
  CHECK(!interaction_interval({tube}, Vec3(0, 200, 0), Vec3(v, 0, 0), 0, c));
  const auto rest = interaction_interval({tube}, Vec3(5, 0, 0), Vec3::Zero(), 0, c);
  REQUIRE(rest);
  CHECK(std::isinf(rest->begin_us));
  // Hull over two elements.
  GaussianTube drive{Vec3(200, 0, 0), Vec3::UnitY(), 10};
  const auto both = interaction_interval({tube, drive}, Vec3(0, 0, 0), Vec3(v, 0, 0), 0, c);
  REQUIRE(both);
  CHECK(std::abs(both->end_us - (200 + 10 * std::sqrt(std::log(1 / c))) / v) < 1e-12);
}

TEST_CASE("clusters group transitively overlapping intervals", "[scenario][source]") {
  std::vector<std::optional<Interval>> iv = {Interval{0, 2}, Interval{5, 6}, Interval{1, 3}, std::nullopt,
                                             Interval{2.5, 4}, Interval{6, 7}};
  const auto c = make_clusters(iv);
  REQUIRE(c.size() == 3);  // {0, 2, 4}, {1}, {5} (touching at 6 is not overlapping)
  CHECK(c[0].members.size() == 3);
  CHECK(c[0].span.begin_us == 0);
  CHECK(c[0].span.end_us == 4);
  CHECK(c[1].members[0].atom == 1);
  CHECK(c[2].members[0].atom == 5);
  CHECK(make_clusters({}).empty());
  CHECK(max_simultaneous(c[0]) == 2);  // [0,2] with [1,3], then [1,3] with [2.5,4]
  CHECK(max_simultaneous(c[1]) == 1);
  const auto three = make_clusters({Interval{0, 10}, Interval{1, 9}, Interval{2, 3}, Interval{9, 12}});
  REQUIRE(three.size() == 1);
  CHECK(max_simultaneous(three[0]) == 3);
}

TEST_CASE("mean chord of the mode cylinder: slit closed form and Gaussian limit", "[scenario][source]") {
  BeamSpec b = rb87_beam();
  const double R = 30;
  // ∫ 2√(R² − y²) dy = π R²; slit of width W ⊃ [−R, R]: ⟨chord⟩ = π R²/W.
  CHECK(std::abs(mean_chord_um(b, R) - kPi * R * R / 200) < 1e-9);
  b.profile = TransverseProfile::kGaussian;
  b.sigma_um = 3000;  // wide: density ≈ 1/(σ√2π) over the circle
  CHECK(std::abs(mean_chord_um(b, R) / (kPi * R * R / (b.sigma_um * std::sqrt(2 * kPi))) - 1.0) < 1e-4);
}

TEST_CASE("initial populations: validation and sampling frequencies", "[scenario][source]") {
  PopulationSpec p;
  p.sublevels = {{4, -4, 0.5}, {4, 4, 0.3}, {2, 0, 0.2}};
  const auto probs = resolve_populations(p, {2, 4});  // F = 1 (3 sublevels) then F = 2 (5)
  REQUIRE(probs.size() == 8);
  CHECK(probs[1] == 0.2);  // F = 1, m = 0
  CHECK(probs[3] == 0.5);  // F = 2, m = −2
  CHECK(probs[7] == 0.3);
  auto rng = flyby::make_stream(flyby::test::seed("populations"), flyby::StreamPurpose::kTest, 2);
  const int n = 100000;
  std::vector<int> hits(8, 0);
  for (int i = 0; i < n; ++i) ++hits[sample_sublevel(probs, rng)];
  for (int i = 0; i < 8; ++i) {
    const double sd = std::sqrt(n * probs[i] * (1 - probs[i]));
    if (probs[i] == 0) CHECK(hits[i] == 0);
    else CHECK(std::abs(hits[i] - n * probs[i]) < 5 * sd);
  }
  PopulationSpec bad = p;
  bad.sublevels[0].probability = 0.4;
  CHECK_THROWS_WITH(resolve_populations(bad, {2, 4}), Catch::Contains("sum to"));
  bad = p;
  bad.sublevels[2].two_m = 4;  // m = 2 in F = 1
  CHECK_THROWS_WITH(resolve_populations(bad, {2, 4}), Catch::Contains("not a sublevel"));
  bad = p;
  bad.sublevels[2].two_F = 6;
  CHECK_THROWS_WITH(resolve_populations(bad, {2, 4}), Catch::Contains("not an included ground level"));
  CHECK(resolve_populations({}, {2, 4}).size() == 8);
}

TEST_CASE("Gaussian and monochromatic speeds; tilt scales the mean atom number by 1/cos θ", "[scenario][source]") {
  SpeedSpec g;
  g.kind = SpeedKind::kGaussian;
  g.speed_m_per_s = 15;
  g.spread_m_per_s = 2;
  auto rng = flyby::make_stream(flyby::test::seed("gaussian speeds"), flyby::StreamPurpose::kTest, 3);
  Stats s;
  for (int i = 0; i < 100000; ++i) s.add(sample_speed(g, rng));
  CHECK(std::abs(s.mean - 15) < 5 * s.sem());
  // Sample variance of a normal: s.d.(s²) = σ²√(2/(n−1)).
  CHECK(std::abs(s.var() - 4) < 5 * 4 * std::sqrt(2.0 / (s.n - 1)));
  CHECK(std::abs(mean_speed_m_per_s(g) - 15) < 1e-9);
  g.spread_m_per_s = 5;  // more than a quarter of the mean
  CHECK_THROWS_AS(validate(g), flyby::InputError);

  BeamSpec b;
  b.speed.kind = SpeedKind::kMonochromatic;
  b.speed.speed_m_per_s = 100;
  b.slit_width_um = 500;
  b.flux_per_s = 1e6;
  // N̄ = R · π w0²/W · 1/v for an untilted beam (slit ⊃ the w0 circle).
  const double n0 = mean_atoms_in_mode(b, 1e6, 40);
  CHECK(std::abs(n0 - 1e6 * kPi * 1600 / 500 / 100 * 1e-6) < 1e-12);
  b.tilt_deg = 30;
  CHECK(std::abs(mean_atoms_in_mode(b, 1e6, 40) * std::cos(kPi / 6) - n0) < 1e-12);
  // The tilted axes: d in the x–z plane, u1 = ŷ, u2 ⊥ both.
  const BeamAxes a = beam_axes(b);
  CHECK((a.d - Vec3(std::cos(kPi / 6), 0, std::sin(kPi / 6))).norm() < 1e-12);
  CHECK((a.u1 - Vec3::UnitY()).norm() < 1e-12);
  CHECK(std::abs(a.u2.dot(a.d)) < 1e-12);
}
