// Level-structure builder (models/levels/level_structure.h) against shared/REFERENCES.md
// (S_FF′, g_F, Breit–Rabi splittings, excited hyperfine splittings) and against physics that
// does not use the builder's formulas: the dipole operators transformed to the uncoupled
// |J m_J⟩|I m_I⟩ basis must equal the Wigner–Eckart J-level operator (tests the 6j reduction
// and every sign), Breit–Rabi energies must equal eigenvalues of A I·J + μB B (g_J J_z + g_I I_z)
// diagonalized numerically, and Σ_q A_q†A_q = 1 − loss on every excited sublevel.
#include <catch2/catch.hpp>

#include <Eigen/Eigenvalues>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <map>
#include <string>
#include <tuple>
#include <vector>

#include "engine/common/constants.h"
#include "engine/common/errors.h"
#include "models/angular/wigner.h"
#include "models/levels/level_structure.h"
#include "models/species/species.h"

using flyby::levels::GroundZeeman;
using flyby::levels::LevelRequest;
using flyby::levels::LevelStructure;
using flyby::levels::Line;

namespace {


LevelRequest full_request(const std::string& species, Line line, double field_G = 0.0) {
  const auto& s = flyby::species::lookup(species);
  LevelRequest r;
  r.species = species;
  r.line = line;
  r.ground_2F = LevelStructure::allowed_2F(s.two_I, 1);
  r.excited_2F = LevelStructure::allowed_2F(s.two_I, line == Line::kD1 ? 1 : 3);
  r.field_G = field_G;
  return r;
}

double shift_MHz(const flyby::levels::Sublevel& s) { return s.energy_rad_per_us / (2 * std::numbers::pi); }

// Energy (MHz) of sublevel (excited, 2F, 2m).
double energy_of(const LevelStructure& ls, bool excited, int two_F, int two_m) {
  for (const auto& s : ls.sublevels()) {
    if (s.excited == excited && s.two_F == two_F && s.two_m == two_m) return shift_MHz(s);
  }
  FAIL("no such sublevel");
  return 0.0;
}

}  // namespace

TEST_CASE("relative strengths S_FF' match REFERENCES.md and sum to one", "[levels]") {
  // Source: shared/REFERENCES.md, S_FF′ = (2F′+1)(2J+1){J J′ 1; F′ F I}² (D2, exact fractions).
  const double eps = 1e-14;
  struct Row {
    const char* species;
    int two_F;
    std::vector<double> S;  // for F′ ascending as in REFERENCES.md
    std::vector<int> two_Fp;
  };
  const std::vector<Row> rows = {
      {"Rb87", 4, {1.0 / 20, 1.0 / 4, 7.0 / 10}, {2, 4, 6}},
      {"Rb87", 2, {1.0 / 6, 5.0 / 12, 5.0 / 12}, {0, 2, 4}},
      {"Rb85", 6, {5.0 / 63, 5.0 / 18, 9.0 / 14}, {4, 6, 8}},
      {"Rb85", 4, {3.0 / 10, 7.0 / 18, 14.0 / 45}, {2, 4, 6}},
      {"Cs133", 8, {7.0 / 72, 7.0 / 24, 11.0 / 18}, {6, 8, 10}},
  };
  for (const auto& row : rows) {
    LevelRequest r;
    r.species = row.species;
    r.line = Line::kD2;
    r.ground_2F = {row.two_F};
    r.excited_2F = row.two_Fp;
    const auto ls = LevelStructure::from_species(r);
    const auto st = ls.strengths();
    REQUIRE(st.size() == row.S.size());
    for (std::size_t i = 0; i < st.size(); ++i) {
      INFO(row.species << " F=" << row.two_F / 2 << " F'=" << st[i].excited_2F / 2);
      CHECK(st[i].excited_2F == row.two_Fp[i]);
      CHECK(std::abs(st[i].S - row.S[i]) <= eps);
    }
  }
  // Sum rule Σ_F′ S_FF′ = 1 for every ground F of every species and line (6j orthogonality,
  // Edmonds (1957) eq. 6.2.9).
  for (const auto& name : flyby::species::names()) {
    for (Line line : {Line::kD1, Line::kD2}) {
      const auto ls = LevelStructure::from_species(full_request(name, line));
      std::map<int, double> sum;
      for (const auto& s : ls.strengths()) sum[s.ground_2F] += s.S;
      for (const auto& [f, total] : sum) {
        INFO(name << (line == Line::kD1 ? " D1" : " D2") << " F=" << f / 2);
        CHECK(std::abs(total - 1.0) <= eps);
      }
    }
  }
}

TEST_CASE("level g_F and linear Zeeman shifts match REFERENCES.md", "[levels]") {
  // Source: shared/REFERENCES.md [derived] from Steck's g_J and g_I [memory]; 7 decimals.
  struct G {
    const char* species;
    int two_F;
    double gF;
  };
  for (const G& g : {G{"Rb87", 2, -0.5018267}, G{"Rb87", 4, 0.4998364}, G{"Rb85", 4, -0.3340644},
                     G{"Rb85", 6, 0.3334772}, G{"Cs133", 6, -0.2507663}, G{"Cs133", 8, 0.2499685}}) {
    const auto ls = LevelStructure::from_species(full_request(g.species, Line::kD2));
    bool found = false;
    for (const auto& h : ls.hyperfine_levels()) {
      if (!h.excited && h.two_F == g.two_F) {
        found = true;
        INFO(g.species << " F=" << g.two_F / 2);
        CHECK(std::abs(h.gF - g.gF) <= 5.0001e-8);
      }
    }
    CHECK(found);
  }
  // 85Rb F=3 linear Zeeman shift 0.46674 MHz/G per unit m (REFERENCES.md [derived]; 5 decimals).
  LevelRequest r = full_request("Rb85", Line::kD2, 1.0);
  const auto ls = LevelStructure::from_species(r);
  for (int two_m = -6; two_m <= 4; two_m += 2) {
    const double d = energy_of(ls, false, 6, two_m + 2) - energy_of(ls, false, 6, two_m);
    CHECK(std::abs(d - 0.46674) <= 5.0001e-6);
  }
}

TEST_CASE("Breit–Rabi splittings of 85Rb F=3 at 1 G match REFERENCES.md", "[levels]") {
  // Source: shared/REFERENCES.md [derived], adjacent splittings m=−3→−2 … m=2→3 in kHz, given
  // to 0.1 Hz (so |Δ| ≤ 0.05 Hz plus the double rounding of a 3 GHz energy difference).
  const std::vector<double> ref_kHz = {467.1025, 466.9584, 466.8145, 466.6707, 466.5271, 466.3836};
  LevelRequest r = full_request("Rb85", Line::kD2, 1.0);
  r.ground_zeeman = GroundZeeman::kBreitRabi;
  const auto ls = LevelStructure::from_species(r);
  for (int k = 0; k < 6; ++k) {
    const int two_m = -6 + 2 * k;
    const double d_kHz = 1e3 * (energy_of(ls, false, 6, two_m + 2) - energy_of(ls, false, 6, two_m));
    INFO("m = " << two_m / 2 << " -> " << two_m / 2 + 1);
    REQUIRE(std::isfinite(d_kHz));
    CHECK(std::abs(d_kHz - ref_kHz[k]) <= 0.5e-4 + 1e-6);
  }
}

TEST_CASE("Breit–Rabi energies equal a numerical diagonalization of the ground Hamiltonian", "[levels]") {
  // Independent check: H = A I·J + μB B (g_J J_z + g_I I_z) on |m_J⟩|m_I⟩ (J = 1/2; Steck's
  // notes, sign convention of angular/lande.h), diagonalized by Eigen, compared per m sector
  // with the closed form, for fields from 0.1 G to 2 kG (x > 1 for Na and K, where the
  // stretched state's sqrt(...) = |1 − x| branch matters).
  using flyby::constants::muB_over_h_MHz_per_G;
  for (const auto& name : flyby::species::names()) {
    const auto& s = flyby::species::lookup(name);
    const int tI = s.two_I, nI = tI + 1;
    for (double B : {0.1, 1.0, 30.0, 300.0, 2000.0}) {
      Eigen::MatrixXd H = Eigen::MatrixXd::Zero(2 * nI, 2 * nI);
      auto idx = [&](int two_mJ, int two_mI) { return ((two_mJ + 1) / 2) * nI + (two_mI + tI) / 2; };
      for (int mJ = -1; mJ <= 1; mJ += 2)
        for (int mI = -tI; mI <= tI; mI += 2) {
          const int i = idx(mJ, mI);
          H(i, i) += s.ground_A_MHz * (mJ / 2.0) * (mI / 2.0) +
                     muB_over_h_MHz_per_G * B * (s.ground_gJ * mJ / 2.0 + s.gI * mI / 2.0);
          // (A/2)(J+ I− + J− I+): J+|−1/2⟩ = |1/2⟩, I−|mI⟩ = √(I(I+1) − mI(mI−1)) |mI−1⟩
          if (mJ == -1 && mI > -tI) {
            const double I = tI / 2.0, m = mI / 2.0;
            const double v = 0.5 * s.ground_A_MHz * std::sqrt(I * (I + 1) - m * (m - 1));
            H(idx(1, mI - 2), i) += v;
            H(i, idx(1, mI - 2)) += v;
          }
        }
      LevelRequest r = full_request(name, Line::kD2, B);
      r.ground_zeeman = GroundZeeman::kBreitRabi;
      const auto ls = LevelStructure::from_species(r);
      // Per total m = mJ + mI, compare sorted eigenvalues with sorted closed-form energies.
      for (int two_M = -(tI + 1); two_M <= tI + 1; two_M += 2) {
        std::vector<int> members;
        for (int mJ = -1; mJ <= 1; mJ += 2) {
          const int mI = two_M - mJ;
          if (std::abs(mI) <= tI) members.push_back(idx(mJ, mI));
        }
        Eigen::MatrixXd block(members.size(), members.size());
        for (std::size_t a = 0; a < members.size(); ++a)
          for (std::size_t b = 0; b < members.size(); ++b) block(a, b) = H(members[a], members[b]);
        Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(block);
        std::vector<double> numeric(es.eigenvalues().data(), es.eigenvalues().data() + members.size());
        std::vector<double> closed;
        for (const auto& sl : ls.sublevels()) {
          if (!sl.excited && sl.two_m == two_M) closed.push_back(shift_MHz(sl));
        }
        std::sort(closed.begin(), closed.end());
        REQUIRE(closed.size() == numeric.size());
        for (std::size_t k = 0; k < closed.size(); ++k) {
          INFO(name << " B=" << B << " G, 2M=" << two_M);
          // Eigen's symmetric solver: error ~ n·eps·‖H‖ with ‖H‖ ≲ 2e4 MHz.
          CHECK(std::abs(closed[k] - numeric[k]) <= 1e-9);
        }
      }
    }
  }
}

TEST_CASE("Breit–Rabi tends to the linear Zeeman shift at small field", "[levels]") {
  // The quadratic term is ~ (g_J μB B)²/ΔE_hfs; at 1 mG it is < 1e-9 MHz for every species.
  for (const auto& name : flyby::species::names()) {
    LevelRequest lin = full_request(name, Line::kD2, 1e-3);
    LevelRequest br = lin;
    br.ground_zeeman = GroundZeeman::kBreitRabi;
    const auto a = LevelStructure::from_species(lin), b = LevelStructure::from_species(br);
    for (int i = 0; i < a.dimension(); ++i) {
      INFO(name << " sublevel " << i);
      CHECK(std::abs(shift_MHz(a.sublevels()[i]) - shift_MHz(b.sublevels()[i])) <= 1e-8);
    }
  }
}

TEST_CASE("excited hyperfine splittings from A and B match REFERENCES.md", "[levels]") {
  // Source: shared/REFERENCES.md, excited splittings [memory] (Steck's D-line notes):
  // 87Rb F′=3–2, 2–1, 1–0: 266.6500, 156.9470, 72.2180 MHz; 85Rb F′=4–3, 3–2, 2–1: 120.640,
  // 63.401, 29.372 MHz; Cs F′=5–4, 4–3, 3–2: 251.0916, 201.2871, 151.2247 MHz. These are
  // directly measured intervals, whereas the builder uses the fitted A and B (no octupole C);
  // the measured intervals carry uncertainties up to ~0.009 MHz in Steck's notes [memory], so
  // the bound is 0.01 MHz (A- or B-term mistakes would show up at the MHz level).
  struct Case {
    const char* species;
    std::vector<double> splittings;  // from the highest F′ down
  };
  for (const Case& c : {Case{"Rb87", {266.6500, 156.9470, 72.2180}}, Case{"Rb85", {120.640, 63.401, 29.372}},
                        Case{"Cs133", {251.0916, 201.2871, 151.2247}}}) {
    const auto ls = LevelStructure::from_species(full_request(c.species, Line::kD2));
    std::vector<double> shifts;
    for (const auto& h : ls.hyperfine_levels()) {
      if (h.excited) shifts.push_back(h.hyperfine_shift_MHz);
    }
    REQUIRE(shifts.size() == 4);
    for (int k = 0; k < 3; ++k) {
      INFO(c.species << " splitting " << k);
      CHECK(std::abs((shifts[3 - k] - shifts[2 - k]) - c.splittings[k]) <= 0.01);
    }
  }
  // The shifts are measured from the centroid: Σ_F (2F+1) ΔE_F = 0 (trace of A I·J and of the
  // quadrupole operator vanish).
  for (const auto& name : flyby::species::names())
    for (Line line : {Line::kD1, Line::kD2}) {
      const auto ls = LevelStructure::from_species(full_request(name, line));
      double g = 0, e = 0;
      for (const auto& h : ls.hyperfine_levels()) (h.excited ? e : g) += (h.two_F + 1) * h.hyperfine_shift_MHz;
      CHECK(std::abs(g) <= 1e-9);
      CHECK(std::abs(e) <= 1e-9);
    }
}

TEST_CASE("dipole operators equal the J-level operator in the uncoupled basis", "[levels]") {
  // Wigner–Eckart in the |J m_J⟩|I m_I⟩ basis (Edmonds 1957, eq. 5.4.1; Steck's convention):
  //   ⟨J m_J; I m_I| d_q |J′ m_J′; I m_I′⟩ = ⟨J‖d‖J′⟩ ⟨J m_J|J′ m_J′; 1 q⟩ δ(m_I, m_I′),
  // so with every F, F′ included, U_g A_q U_eᵀ = √((2J′+1)/(2J+1)) ⟨J m_J|J′ m_J′; 1 q⟩ δ.
  // U are Clebsch–Gordan tables only; the 6j reduction and its phase are what is tested.
  using flyby::angular::clebsch_gordan;
  for (const auto& name : flyby::species::names()) {
    for (Line line : {Line::kD1, Line::kD2}) {
      const auto ls = LevelStructure::from_species(full_request(name, line, 0.5));
      const int tI = ls.two_I(), tJ = ls.two_J(), tJp = ls.two_Jp();
      const int n = ls.dimension();
      // Rows: uncoupled ground (mJ, mI), then uncoupled excited; U maps sublevels → uncoupled.
      std::vector<std::pair<int, int>> ung, une;
      for (int mJ = -tJ; mJ <= tJ; mJ += 2)
        for (int mI = -tI; mI <= tI; mI += 2) ung.emplace_back(mJ, mI);
      for (int mJ = -tJp; mJ <= tJp; mJ += 2)
        for (int mI = -tI; mI <= tI; mI += 2) une.emplace_back(mJ, mI);
      Eigen::MatrixXd Ug = Eigen::MatrixXd::Zero(ung.size(), n), Ue = Eigen::MatrixXd::Zero(une.size(), n);
      for (int k = 0; k < n; ++k) {
        const auto& s = ls.sublevels()[k];
        auto& U = s.excited ? Ue : Ug;
        const auto& un = s.excited ? une : ung;
        const int tj = s.excited ? tJp : tJ;
        for (std::size_t u = 0; u < un.size(); ++u)
          U(u, k) = clebsch_gordan(tj, un[u].first, tI, un[u].second, s.two_F, s.two_m);
      }
      const double norm = std::sqrt((tJp + 1.0) / (tJ + 1.0));
      for (int q = -1; q <= 1; ++q) {
        const Eigen::MatrixXd Aun = Ug * ls.lowering(q) * Ue.transpose();
        double max_err = 0.0;
        for (std::size_t a = 0; a < ung.size(); ++a)
          for (std::size_t b = 0; b < une.size(); ++b) {
            const double expect = ung[a].second == une[b].second
                                      ? norm * clebsch_gordan(tJp, une[b].first, 2, 2 * q, tJ, ung[a].first)
                                      : 0.0;
            max_err = std::max(max_err, std::abs(Aun(a, b) - expect));
          }
        INFO(name << (line == Line::kD1 ? " D1" : " D2") << " q=" << q);
        CHECK(max_err <= 1e-14);
      }
    }
  }
}

TEST_CASE("decay into the model plus loss is the full decay on every excited sublevel", "[levels]") {
  // Contract of level_structure.h: Σ_q ⟨e|A_q†A_q|e⟩ = 1 − loss_fraction(e); with all ground
  // levels included the loss is 0; the lowering operators only connect m_g = m_e + q.
  for (const auto& name : flyby::species::names()) {
    for (Line line : {Line::kD1, Line::kD2}) {
      const auto full = full_request(name, line, 1.5);
      std::vector<std::vector<int>> ground_sets = {full.ground_2F, {full.ground_2F.front()}, {full.ground_2F.back()}};
      for (const auto& [gs, zeeman, B] : {std::tuple{ground_sets[0], GroundZeeman::kLinear, 1.5},
                                          std::tuple{ground_sets[1], GroundZeeman::kLinear, 1.5},
                                          std::tuple{ground_sets[2], GroundZeeman::kLinear, 1.5},
                                          std::tuple{ground_sets[1], GroundZeeman::kBreitRabi, 300.0},
                                          std::tuple{ground_sets[2], GroundZeeman::kBreitRabi, 300.0}}) {
        LevelRequest r = full;
        r.ground_2F = gs;
        r.ground_zeeman = zeeman;
        r.field_G = B;
        const auto ls = LevelStructure::from_species(r);
        Eigen::MatrixXd sum = Eigen::MatrixXd::Zero(ls.dimension(), ls.dimension());
        for (int q = -1; q <= 1; ++q) {
          const auto& A = ls.lowering(q);
          sum += A.transpose() * A;
          for (int g = 0; g < ls.dimension(); ++g)
            for (int e = 0; e < ls.dimension(); ++e) {
              if (A(g, e) == 0.0) continue;
              const auto &sg = ls.sublevels()[g], &se = ls.sublevels()[e];
              CHECK((!sg.excited && se.excited && sg.two_m == se.two_m + 2 * q));
            }
        }
        for (int e = 0; e < ls.dimension(); ++e) {
          const bool excited = ls.sublevels()[e].excited;
          const double expect = excited ? 1.0 - ls.loss_fraction(e) : 0.0;
          INFO(name << " sublevel " << e);
          CHECK(std::abs(sum(e, e) - expect) <= 1e-14);
          if (gs.size() == full.ground_2F.size()) CHECK(ls.loss_fraction(e) == Approx(0.0).margin(1e-15));
        }
        // Branching ratios of each F′ sum to one, and the loss is their out-of-model part.
        std::map<int, double> total;
        for (const auto& b : ls.branching()) total[b.excited_2F] += b.fraction;
        for (const auto& [fp, t] : total) CHECK(std::abs(t - 1.0) <= 1e-14);
      }
    }
  }
  // Known case (Steck's notes, branching of 87Rb D2): F′=1 decays 5/6 to F=1 and 1/6 to F=2.
  LevelRequest r;
  r.species = "Rb87";
  r.ground_2F = {4};
  r.excited_2F = {2};
  const auto ls = LevelStructure::from_species(r);
  CHECK(std::abs(ls.loss_fraction(ls.dimension() - 1) - 5.0 / 6) <= 1e-15);
}

TEST_CASE("custom atom: closed transition with the given g_F, Γ and λ", "[levels]") {
  flyby::levels::CustomAtom a;
  a.ground_2F = 1;
  a.excited_2F = 3;
  a.ground_gF = 2.0;
  a.excited_gF = 4.0 / 3;
  a.gamma_MHz = 6.0;
  a.wavelength_nm = 780.0;
  a.field_G = 2.0;
  const auto ls = LevelStructure::from_custom(a);
  REQUIRE(ls.dimension() == 6);
  CHECK(std::abs(ls.gamma_rad_per_us() - 2 * std::numbers::pi * 6.0) <= 1e-12);
  // Zeeman shift μB g_F m B (μB/h from CODATA 2018, engine/common/constants.h).
  CHECK(std::abs(shift_MHz(ls.sublevels()[5]) - flyby::constants::muB_over_h_MHz_per_G * (4.0 / 3) * 1.5 * 2.0) <= 1e-12);
  Eigen::MatrixXd sum = Eigen::MatrixXd::Zero(6, 6);
  for (int q = -1; q <= 1; ++q) sum += ls.lowering(q).transpose() * ls.lowering(q);
  for (int e = 2; e < 6; ++e) CHECK(std::abs(sum(e, e) - 1.0) <= 1e-14);
  // Stretched transition |F′=3/2, m′=3/2⟩ → |F=1/2, m=1/2⟩ has weight 1 (σ+), ⟨1/2 1/2|3/2 3/2; 1 −1⟩².
  CHECK(std::abs(std::pow(ls.lowering(-1)(1, 5), 2) - 1.0) <= 1e-14);

  a.excited_2F = 7;
  CHECK_THROWS_AS(LevelStructure::from_custom(a), flyby::InputError);
  a.excited_2F = 3;
  a.gamma_MHz = -1;
  CHECK_THROWS_AS(LevelStructure::from_custom(a), flyby::InputError);
}

TEST_CASE("impossible requests are one-line input errors naming the allowed values", "[levels]") {
  LevelRequest r;
  r.species = "Rb87";
  r.ground_2F = {6};
  r.excited_2F = {6};
  try {
    LevelStructure::from_species(r);
    FAIL("no error");
  } catch (const flyby::InputError& e) {
    const std::string m = e.what();
    CHECK(m.find("F=3") != std::string::npos);
    CHECK(m.find("allowed: 1, 2") != std::string::npos);
    CHECK(m.find('\n') == std::string::npos);
  }
  r.ground_2F = {4};
  r.excited_2F = {8};
  try {
    LevelStructure::from_species(r);
    FAIL("no error");
  } catch (const flyby::InputError& e) {
    CHECK(std::string(e.what()).find("allowed: 0, 1, 2, 3") != std::string::npos);
  }
  r.line = Line::kD1;
  r.excited_2F = {6};
  CHECK_THROWS_WITH(LevelStructure::from_species(r), Catch::Contains("allowed: 1, 2"));
  r.excited_2F = {2, 2};
  CHECK_THROWS_AS(LevelStructure::from_species(r), flyby::InputError);
  r.excited_2F = {2};
  r.field_G = -1;
  CHECK_THROWS_AS(LevelStructure::from_species(r), flyby::InputError);
  r.field_G = 0;
  r.species = "Li7";
  CHECK_THROWS_WITH(LevelStructure::from_species(r), Catch::Contains("Rb87, Rb85, Cs133, Na23, K39"));
}

TEST_CASE("validity notes flag fields where the Zeeman model is approximate", "[levels]") {
  // 39K 4P3/2 F′ spacings are a few MHz (Tiecke [memory]); at 1.5 G g_J′ μB B ≈ 2.8 MHz.
  auto k = LevelStructure::from_species(full_request("K39", Line::kD2, 1.5));
  bool paschen_back = false;
  for (const auto& n : k.notes()) paschen_back |= n.find("Paschen-Back") != std::string::npos;
  CHECK(paschen_back);
  // 87Rb at 0.1 G: quadratic ground shift ~6 Hz, excited spacings ≥ 72 MHz: nothing to flag.
  CHECK(LevelStructure::from_species(full_request("Rb87", Line::kD2, 0.1)).notes().empty());
  // 87Rb at 3 G, linear: the F=2, m=0 quadratic shift ΔE_hfs·x²/4 with x = (g_J − g_I)μB B/ΔE_hfs
  // ≈ 1.2e-3 is ≈ 2.6 kHz, flagged; the excited Zeeman energy 5.6 MHz is < 10 % of the 72 MHz
  // F′=0–1 spacing, not flagged. With Breit–Rabi the ground note disappears.
  auto lin = LevelStructure::from_species(full_request("Rb87", Line::kD2, 3.0));
  REQUIRE(lin.notes().size() == 1);
  CHECK(lin.notes()[0].find("Breit-Rabi") != std::string::npos);
  auto req = full_request("Rb87", Line::kD2, 3.0);
  req.ground_zeeman = GroundZeeman::kBreitRabi;
  CHECK(LevelStructure::from_species(req).notes().empty());
}

TEST_CASE("Breit–Rabi dipole operators equal those of numerically diagonalized ground states", "[levels]") {
  // Independent check of the mixed ground eigenstates: diagonalize
  // H = A I·J + μB B (g_J J_z + g_I I_z) per m in the uncoupled |m_J⟩|m_I⟩ basis (Eigen), apply
  // the J-level dipole operator √((2J′+1)/(2J+1)) ⟨J m_J|J′ m_J′; 1 q⟩ δ(m_I, m_I′) (Wigner–
  // Eckart, Edmonds 1957 eq. 5.4.1) and couple the excited side with Clebsch–Gordan tables.
  // Eigenvector signs follow the builder's convention (positive own |F m⟩ component).
  // Bound: eigenvector error ~ eps‖H‖/gap ≲ 1e-12 here.
  using flyby::angular::clebsch_gordan;
  using flyby::constants::muB_over_h_MHz_per_G;
  for (const auto& name : flyby::species::names()) {
    const auto& s = flyby::species::lookup(name);
    const int tI = s.two_I;
    for (double B : {1.0, 300.0, 2000.0}) {
      LevelRequest r = full_request(name, Line::kD2, B);
      r.ground_zeeman = GroundZeeman::kBreitRabi;
      const auto ls = LevelStructure::from_species(r);
      const int n = ls.dimension();
      for (int g = 0; g < n; ++g) {
        const auto& sg = ls.sublevels()[g];
        if (sg.excited) continue;
        // Uncoupled states of this m and the Hamiltonian block on them.
        std::vector<std::pair<int, int>> uc;  // (2mJ, 2mI)
        for (int mJ = -1; mJ <= 1; mJ += 2)
          if (std::abs(sg.two_m - mJ) <= tI) uc.emplace_back(mJ, sg.two_m - mJ);
        const int k = static_cast<int>(uc.size());
        Eigen::MatrixXd H = Eigen::MatrixXd::Zero(k, k);
        for (int a = 0; a < k; ++a) {
          H(a, a) = s.ground_A_MHz * (uc[a].first / 2.0) * (uc[a].second / 2.0) +
                    muB_over_h_MHz_per_G * B * (s.ground_gJ * uc[a].first / 2.0 + s.gI * uc[a].second / 2.0);
        }
        if (k == 2) {  // (A/2)(J+I− + J−I+) couples (−1/2, mI) and (+1/2, mI − 1)
          const double I = tI / 2.0, mI = uc[0].second / 2.0;  // uc[0] has mJ = −1/2
          H(0, 1) = H(1, 0) = 0.5 * s.ground_A_MHz * std::sqrt(I * (I + 1) - mI * (mI - 1));
        }
        Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(H);
        const double E = shift_MHz(sg);
        int best = 0;
        for (int a = 1; a < k; ++a)
          if (std::abs(es.eigenvalues()[a] - E) < std::abs(es.eigenvalues()[best] - E)) best = a;
        REQUIRE(std::abs(es.eigenvalues()[best] - E) <= 1e-8);
        Eigen::VectorXd v = es.eigenvectors().col(best);
        double own = 0.0;
        for (int a = 0; a < k; ++a) own += v[a] * clebsch_gordan(1, uc[a].first, tI, uc[a].second, sg.two_F, sg.two_m);
        REQUIRE(std::abs(own) > 0.5);
        if (own < 0) v = -v;
        for (int e = 0; e < n; ++e) {
          const auto& se = ls.sublevels()[e];
          if (!se.excited) continue;
          const int two_q = sg.two_m - se.two_m;
          if (std::abs(two_q) > 2) continue;
          double expect = 0.0;
          for (int a = 0; a < k; ++a) {
            const int mI = uc[a].second, mJp = se.two_m - mI;  // excited m_I equals ground m_I
            if (std::abs(mJp) > 3) continue;
            expect += v[a] * std::sqrt(4.0 / 2.0) * clebsch_gordan(3, mJp, 2, two_q, 1, uc[a].first) *
                      clebsch_gordan(3, mJp, tI, mI, se.two_F, se.two_m);
          }
          INFO(name << " B=" << B << " G, ground (2F,2m)=(" << sg.two_F << "," << sg.two_m << "), excited (" << se.two_F
                    << "," << se.two_m << ")");
          CHECK(std::abs(ls.lowering(two_q / 2)(g, e) - expect) <= 1e-12);
        }
      }
    }
  }
}
