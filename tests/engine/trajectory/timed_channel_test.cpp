// Collapse channels with a time-dependent part (channels::Channel::timed, used by the eliminated
// resonator modes of moving atoms): the integrator must apply −(i/2) C(t)†C(t) in the no-jump
// evolution and C(t) at the jump.
#include <catch2/catch.hpp>
#include <cmath>

#include "engine/trajectory/integrator.h"
#include "tests/engine/engine_test_models.h"
#include "tests/support/test_seed.h"

using namespace flyby;
using flyby::operators::Coefficient;
using flyby::operators::Complex;
using flyby::operators::Operator;
using flyby::test::scaled;

TEST_CASE("timed channel: a pure phase e^{i w t} changes no jump of a driven atom", "[engine][trajectory][timed]") {
  // C(t) = √Γ e^{iωt} σ has the same C†C and the same jump (up to a global phase) as √Γ σ, so
  // with the same random numbers the jump times must agree to the integrators' tolerances (the
  // constant model runs on exact exponentials, the timed one adaptively). The phase is split in
  // two halves, one written with a conjugated coefficient of e^{−iωt}, to cover both flags.
  const double omega = 2.0, gamma = 1.0, w = 7.0;
  trajectory::Model fixed = test::two_level(omega, gamma, 0.3, 40.0);
  trajectory::Model timed = fixed;
  timed.channels[0].op = Operator{};
  timed.physical_decay = Operator{};  // time-dependent channels are outside the completeness check
  const auto sm = test::sigma_minus();
  timed.channels[0].timed.add(Coefficient::of_time([w](double t) { return std::exp(Complex(0.0, w * t)); }, 0.5 * std::sqrt(gamma)),
                              Operator::local(0, sm));
  timed.channels[0].timed.add(
      Coefficient::of_time([w](double t) { return std::exp(Complex(0.0, -w * t)); }, 0.5 * std::sqrt(gamma)).conj(),
      Operator::local(0, sm));
  trajectory::Options opt;
  opt.rtol = 1e-9;
  opt.atol = 1e-11;
  opt.jump_time_tolerance_us = 1e-9;
  const std::uint64_t seed = test::seed("timed-channel-phase");
  Rng r1 = make_stream(seed, StreamPurpose::kTest, 0), r2 = make_stream(seed, StreamPurpose::kTest, 0);
  const auto a = trajectory::Integrator(fixed, opt).run(r1);
  const auto b = trajectory::Integrator(timed, opt).run(r2);
  REQUIRE(a.summary.ok());
  REQUIRE(b.summary.ok());
  REQUIRE(a.jumps.size() > 5);
  REQUIRE(a.jumps.size() == b.jumps.size());
  for (std::size_t k = 0; k < a.jumps.size(); ++k) {
    REQUIRE(std::isfinite(b.jumps[k].time_us));
    // 1e-6 µs: both waiting times are located to 1e-9 µs with ODE errors ≤ 1e-9 relative; a
    // wrong C†C (e.g. a missing conjugate) shifts them by O(1/Γ).
    CHECK(b.jumps[k].time_us == Approx(a.jumps[k].time_us).margin(1e-6));
  }
}

TEST_CASE("timed channel: survival probability with a modulated decay rate", "[engine][trajectory][timed]") {
  // Atom in |e⟩, no Hamiltonian, C(t) = √Γ (1 + a sin ωt) σ written as a constant part plus a
  // timed part. No jump before T has probability exp(−Γ ∫₀ᵀ (1 + a sin ωt)² dt) (waiting-time
  // method, Dalibard, Castin & Mølmer 1992: ‖ψ(T)‖² under H_eff = −(i/2) C†C). Binomial 5σ bound.
  const double gamma = 1.0, amp = 0.8, w = 3.0;
  const auto sm = test::sigma_minus();
  for (double T : {0.4, 1.5}) {
    trajectory::Model m;
    m.subsystems = {space::Subsystem::levels("atom", 2)};
    m.initial = {{0, test::basis(2, 1)}};
    m.channels.push_back({"decay", true, Operator::local(0, sm, std::sqrt(gamma))});
    m.channels[0].timed.add(Coefficient::of_time([w](double t) { return Complex(std::sin(w * t)); }, amp * std::sqrt(gamma)),
                            Operator::local(0, sm));
    m.end_us = T;
    const trajectory::Integrator integ(m, {});
    const long n = scaled(4000);
    const std::uint64_t seed = test::seed("timed-channel-survival");
    long survived = 0;
    for (long k = 0; k < n; ++k) {
      Rng rng = make_stream(seed, StreamPurpose::kTest, std::uint64_t(k));
      const auto r = integ.run(rng);
      REQUIRE(r.summary.ok());
      survived += r.jumps.empty();
    }
    // ∫₀ᵀ (1 + a sin ωt)² dt = T + 2a(1 − cos ωT)/ω + a²(T/2 − sin 2ωT/(4ω)).
    const double integral = T + 2 * amp * (1 - std::cos(w * T)) / w + amp * amp * (T / 2 - std::sin(2 * w * T) / (4 * w));
    const double p = std::exp(-gamma * integral);
    const double frac = double(survived) / double(n), sigma = std::sqrt(p * (1 - p) / double(n));
    INFO("T " << T << ": survived " << frac << ", expected " << p << " +- " << sigma);
    REQUIRE(std::isfinite(frac));
    CHECK(std::abs(frac - p) <= 5 * sigma);
  }
}
