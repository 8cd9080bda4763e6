// Builds LevelStructure from the species table (hyperfine structure from A and B, Zeeman shifts,
// dipole operators by the 6j reduction) or from a custom model atom. Conventions: see the header.
#include "models/levels/level_structure.h"

#include <algorithm>
#include <cmath>
#include <set>
#include <sstream>

#include "engine/common/constants.h"
#include "engine/common/errors.h"
#include "engine/common/units.h"
#include "models/angular/lande.h"
#include "models/angular/wigner.h"
#include "models/species/species.h"

namespace flyby::levels {
namespace {

std::string half_string(int two_x) {
  if (two_x % 2 == 0) return std::to_string(two_x / 2);
  return std::to_string(two_x) + "/2";
}

std::string list_string(const std::vector<int>& two_xs) {
  std::string s;
  for (int x : two_xs) s += (s.empty() ? "" : ", ") + half_string(x);
  return s;
}

// Zero-field hyperfine shift from the J centroid (magnetic dipole A and electric quadrupole B):
//   ΔE = A K/2 + B [3/2 K(K+1) − 2 I(I+1) J(J+1)] / [4 I(2I−1) J(2J−1)],
//   K = F(F+1) − I(I+1) − J(J+1)   (Steck, alkali D-line notes; Arimondo, Inguscio & Violino,
//   Rev. Mod. Phys. 49, 31 (1977)). The B term is absent for I < 1 or J < 1.
double hyperfine_shift_MHz(int two_F, int two_I, int two_J, double A_MHz, double B_MHz) {
  const double F = two_F / 2.0, I = two_I / 2.0, J = two_J / 2.0;
  const double K = F * (F + 1) - I * (I + 1) - J * (J + 1);
  double e = 0.5 * A_MHz * K;
  if (two_I >= 2 && two_J >= 2 && B_MHz != 0.0) {
    e += B_MHz * (1.5 * K * (K + 1) - 2.0 * I * (I + 1) * J * (J + 1)) /
         (4.0 * I * (2 * I - 1) * J * (2 * J - 1));
  }
  return e;
}

// Breit–Rabi energy of the J = 1/2 sublevel that connects to |F, m⟩ at B → 0, from the J
// centroid, MHz (G. Breit and I. I. Rabi, Phys. Rev. 38, 2082 (1931); Steck's notes, sign
// convention H_B = μB (g_J J_z + g_I I_z) B):
//   E = −ΔE/(2(2I+1)) + g_I μB m B ± (ΔE/2) √(1 + 4 m x/(2I+1) + x²),  ΔE = A (I + 1/2),
//   x = (g_J − g_I) μB B / ΔE,  + for F = I + 1/2.
// For |m| = I + 1/2 the square root is |1 ± x|; the energy is the linear, unmixed one
//   E = ΔE I/(2I+1) ± (g_J/2 + I g_I) μB B, used directly so it stays right for x > 1.
double breit_rabi_MHz(int two_F, int two_m, int two_I, double A_MHz, double gJ, double gI, double field_G) {
  const double I = two_I / 2.0, m = two_m / 2.0;
  const double dE = A_MHz * (I + 0.5);
  const double muB_B = constants::muB_over_h_MHz_per_G * field_G;
  if (std::abs(two_m) == two_I + 1) {
    return dE * I / (2 * I + 1) + (two_m > 0 ? 1.0 : -1.0) * (gJ / 2 + I * gI) * muB_B;
  }
  const double x = (gJ - gI) * muB_B / dE;
  const double sign = (two_F == two_I + 1) ? 1.0 : -1.0;
  return -dE / (2 * (2 * I + 1)) + gI * m * muB_B +
         sign * 0.5 * dE * std::sqrt(1 + 4 * m * x / (2 * I + 1) + x * x);
}

void require_finite_nonneg(double v, const char* what) {
  if (!std::isfinite(v) || v < 0) {
    std::ostringstream os;
    os << what << " must be a finite number ≥ 0, got " << v;
    throw InputError(os.str());
  }
}

void require_finite_positive(double v, const char* what) {
  if (!std::isfinite(v) || v <= 0) {
    std::ostringstream os;
    os << what << " must be a finite number > 0, got " << v;
    throw InputError(os.str());
  }
}

// Sorted, de-duplicated, validated list of 2F values.
std::vector<int> checked_levels(const std::vector<int>& requested, const std::vector<int>& allowed,
                                const std::string& which, const std::string& where) {
  if (requested.empty()) {
    throw InputError("no " + which + " F given for " + where + "; allowed: " + list_string(allowed));
  }
  std::set<int> seen;
  for (int f : requested) {
    if (std::find(allowed.begin(), allowed.end(), f) == allowed.end()) {
      throw InputError(which + " F=" + half_string(f) + " is not possible for " + where +
                       "; allowed: " + list_string(allowed));
    }
    if (!seen.insert(f).second) {
      throw InputError(which + " F=" + half_string(f) + " given twice for " + where);
    }
  }
  return {seen.begin(), seen.end()};
}

}  // namespace

// Assembles a LevelStructure (friend of the class).
class LevelBuilder {
 public:
  struct Level {
    bool excited;
    int two_F;
    double gF;
    double hf_MHz;
  };

  // Fills the basis and energies. `energy_MHz(level, two_m)` gives each sublevel's energy.
  template <class EnergyFn>
  static void fill_basis(LevelStructure& ls, const std::vector<Level>& levels, EnergyFn energy_MHz) {
    for (const auto& l : levels) {
      ls.hyperfine_.push_back({l.excited, l.two_F, l.gF, l.hf_MHz});
      for (int two_m = -l.two_F; two_m <= l.two_F; two_m += 2) {
        ls.sublevels_.push_back({l.excited, l.two_F, two_m, units::angular_from_MHz(energy_MHz(l, two_m))});
      }
    }
    const int n = ls.dimension();
    for (auto& a : ls.lowering_) a = Eigen::MatrixXd::Zero(n, n);
    ls.loss_fraction_.assign(static_cast<std::size_t>(n), 0.0);
  }

  // A ground state as a superposition Σ c_F |F m⟩ of hyperfine states with the same m (pure
  // |F m⟩ unless Breit–Rabi mixing is on).
  using Composition = std::vector<std::pair<int, double>>;

  // ⟨g|A_q|e⟩ = Σ_F c_F · reduced(F, F′) · ⟨F m_g|F′ m_e; 1 q⟩ for ground state g = Σ c_F |F m_g⟩.
  template <class ReducedFn>
  static double amplitude(const Composition& g, int two_m_g, const Sublevel& e, ReducedFn reduced) {
    const int two_q = two_m_g - e.two_m;  // m_g = m_e + q
    if (std::abs(two_q) > 2) return 0.0;
    double a = 0.0;
    for (const auto& [two_F, c] : g) {
      const double r = reduced(two_F, e.two_F);
      if (r == 0.0 || c == 0.0) continue;
      a += c * r * angular::clebsch_gordan(e.two_F, e.two_m, 2, two_q, two_F, two_m_g);
    }
    return a;
  }

  // Fills A_q for every ground/excited pair of the basis; `composition(F, m)` gives the ground
  // state labelled (F, m).
  template <class ReducedFn, class CompositionFn>
  static void fill_dipoles(LevelStructure& ls, ReducedFn reduced, CompositionFn composition) {
    const int n = ls.dimension();
    for (int g = 0; g < n; ++g) {
      const auto& sg = ls.sublevels_[g];
      if (sg.excited) continue;
      const Composition comp = composition(sg.two_F, sg.two_m);
      for (int e = 0; e < n; ++e) {
        const auto& se = ls.sublevels_[e];
        if (!se.excited || std::abs(sg.two_m - se.two_m) > 2) continue;
        ls.lowering_[(sg.two_m - se.two_m) / 2 + 1](g, e) = amplitude(comp, sg.two_m, se, reduced);
      }
    }
  }

  // Field-validity warnings (see notes() in the header).
  static void add_validity_notes(LevelStructure& ls, const species::SpeciesData& sp, const species::LineData& line,
                                 const LevelRequest& req) {
    const double B = req.field_G;
    if (B == 0.0) return;
    std::ostringstream os;
    if (req.ground_zeeman == GroundZeeman::kLinear) {
      double worst_kHz = 0.0;
      for (const auto& s : ls.sublevels_) {
        if (s.excited) continue;
        const double br = breit_rabi_MHz(s.two_F, s.two_m, sp.two_I, sp.ground_A_MHz, sp.ground_gJ, sp.gI, B);
        worst_kHz = std::max(worst_kHz, 1e3 * std::abs(br - units::MHz_from_angular(s.energy_rad_per_us)));
      }
      if (worst_kHz > 1.0) {
        os << "at " << B << " G the linear ground Zeeman shifts differ from Breit-Rabi by up to " << worst_kHz
           << " kHz; ask for Breit-Rabi (--breit-rabi) for exact ground energies";
        ls.notes_.push_back(os.str());
        os.str("");
      }
    }
    double min_spacing = 0.0;
    const auto all_e = LevelStructure::allowed_2F(sp.two_I, line.two_Jp);
    for (std::size_t k = 1; k < all_e.size(); ++k) {
      const double d = std::abs(hyperfine_shift_MHz(all_e[k], sp.two_I, line.two_Jp, line.excited_A_MHz, line.excited_B_MHz) -
                                hyperfine_shift_MHz(all_e[k - 1], sp.two_I, line.two_Jp, line.excited_A_MHz, line.excited_B_MHz));
      min_spacing = (k == 1) ? d : std::min(min_spacing, d);
    }
    const double zeeman = std::abs(line.excited_gJ) * constants::muB_over_h_MHz_per_G * B;
    if (all_e.size() > 1 && zeeman > 0.1 * min_spacing) {
      os << "at " << B << " G the excited Zeeman energy g_J' muB B = " << zeeman
         << " MHz is not small against the smallest F' spacing " << min_spacing
         << " MHz; the linear excited Zeeman shifts are approximate (onset of the Paschen-Back regime)";
      ls.notes_.push_back(os.str());
    }
  }

  static LevelStructure species(const LevelRequest& req) {
    const auto& sp = species::lookup(req.species);
    const auto line_id = req.line == Line::kD1 ? species::LineId::kD1 : species::LineId::kD2;
    const auto& line = sp.line(line_id);
    require_finite_nonneg(req.field_G, "field (gauss)");

    LevelStructure ls;
    ls.label_ = sp.description + " " + species::to_string(line_id);
    ls.two_I_ = sp.two_I;
    ls.two_J_ = 1;
    ls.two_Jp_ = line.two_Jp;
    ls.ground_zeeman_ = req.ground_zeeman;
    ls.gamma_rad_per_us_ = units::angular_from_MHz(line.gamma_MHz);
    ls.wavelength_nm_ = line.wavelength_nm;
    ls.line_frequency_MHz_ = constants::c_m_per_s / (line.wavelength_nm * 1e-9) * 1e-6;
    ls.reduced_dipole_C_m_ = line.reduced_dipole_ea0 * constants::e_C * constants::a0_m;
    ls.field_G_ = req.field_G;

    const int two_I = sp.two_I, two_J = 1, two_Jp = line.two_Jp;
    const auto allowed_g = LevelStructure::allowed_2F(two_I, two_J);
    const auto allowed_e = LevelStructure::allowed_2F(two_I, two_Jp);
    const std::string where_g = sp.description + " ground level (I=" + half_string(two_I) + ", J=1/2)";
    const std::string where_e = ls.label_ + " excited level (I=" + half_string(two_I) + ", J'=" + half_string(two_Jp) + ")";
    const auto ground = checked_levels(req.ground_2F, allowed_g, "ground", where_g);
    const auto excited = checked_levels(req.excited_2F, allowed_e, "excited", where_e);

    std::vector<Level> levels;
    for (int f : ground) {
      levels.push_back({false, f, angular::lande_gF(f, two_J, two_I, sp.ground_gJ, sp.gI),
                        hyperfine_shift_MHz(f, two_I, two_J, sp.ground_A_MHz, 0.0)});
    }
    for (int f : excited) {
      levels.push_back({true, f, angular::lande_gF(f, two_Jp, two_I, line.excited_gJ, sp.gI),
                        hyperfine_shift_MHz(f, two_I, two_Jp, line.excited_A_MHz, line.excited_B_MHz)});
    }
    const double B = req.field_G;
    const bool breit_rabi = req.ground_zeeman == GroundZeeman::kBreitRabi;
    fill_basis(ls, levels, [&](const Level& l, int two_m) {
      if (!l.excited && breit_rabi) {
        return breit_rabi_MHz(l.two_F, two_m, two_I, sp.ground_A_MHz, sp.ground_gJ, sp.gI, B);
      }
      return l.hf_MHz + l.gF * constants::muB_over_h_MHz_per_G * (two_m / 2.0) * B;
    });

    // 6j reduction: ⟨g|A_q|e⟩ = (−1)^(F′+J+1+I) √((2F′+1)(2J′+1)) {J J′ 1; F′ F I} ⟨F m_g|F′ m_e; 1 q⟩.
    auto sixj = [&](int two_F, int two_Fp) { return angular::wigner_6j(two_J, two_Jp, 2, two_Fp, two_F, two_I); };
    auto reduced = [&](int two_F, int two_Fp) {
      const int phase = (two_Fp + two_J + 2 + two_I) / 2;
      return ((phase % 2) != 0 ? -1.0 : 1.0) * std::sqrt((two_Fp + 1.0) * (two_Jp + 1.0)) * sixj(two_F, two_Fp);
    };
    // Breit–Rabi eigenstates: within each m the ground Hamiltonian mixes F1 = I + 1/2 and
    // F2 = I − 1/2. In the basis {|F1 m⟩, |F2 m⟩}: H_kk = ΔE_hf(F_k) + g_F(F_k) μB m B and
    // H12 = (g_J − g_I) μB B ⟨F1 m|J_z|F2 m⟩ (I_z = F_z − J_z). The state labelled F1 is the
    // upper eigenvector when A > 0 (no crossing within one m); the sign is fixed so that the
    // state's own component is positive, continuous with |F m⟩ at B → 0.
    auto composition = [&](int two_F, int two_m) -> Composition {
      if (!breit_rabi || B == 0.0 || two_I == 0 || std::abs(two_m) == two_I + 1) return {{two_F, 1.0}};
      const int f1 = two_I + 1, f2 = two_I - 1;
      const double muB_B = constants::muB_over_h_MHz_per_G * B, m = two_m / 2.0;
      const double h11 = hyperfine_shift_MHz(f1, two_I, two_J, sp.ground_A_MHz, 0.0) +
                         angular::lande_gF(f1, two_J, two_I, sp.ground_gJ, sp.gI) * muB_B * m;
      const double h22 = hyperfine_shift_MHz(f2, two_I, two_J, sp.ground_A_MHz, 0.0) +
                         angular::lande_gF(f2, two_J, two_I, sp.ground_gJ, sp.gI) * muB_B * m;
      double jz = 0.0;
      for (int two_mJ = -1; two_mJ <= 1; two_mJ += 2) {
        const int two_mI = two_m - two_mJ;
        if (std::abs(two_mI) > two_I) continue;
        jz += (two_mJ / 2.0) * angular::clebsch_gordan(two_J, two_mJ, two_I, two_mI, f1, two_m) *
              angular::clebsch_gordan(two_J, two_mJ, two_I, two_mI, f2, two_m);
      }
      const double h12 = (sp.ground_gJ - sp.gI) * muB_B * jz;
      const double mean = 0.5 * (h11 + h22), half = std::hypot(0.5 * (h11 - h22), h12);
      const bool f1_upper = sp.ground_A_MHz > 0;
      double c1, c2;
      if (two_F == f1) {
        const double E = f1_upper ? mean + half : mean - half;
        c1 = E - h22;
        c2 = h12;
      } else {
        const double E = f1_upper ? mean - half : mean + half;
        c1 = h12;
        c2 = E - h11;
      }
      const double norm = std::hypot(c1, c2);
      FLYBY_CHECK(norm > 0.0, "Breit-Rabi eigenvector has zero norm");
      const double own = (two_F == f1) ? c1 : c2;
      const double sign = own < 0 ? -1.0 : 1.0;
      return {{f1, sign * c1 / norm}, {f2, sign * c2 / norm}};
    };
    fill_dipoles(ls, reduced, composition);

    add_validity_notes(ls, sp, line, req);

    for (int f : ground) {
      for (int fp : excited) {
        const double w = sixj(f, fp);
        ls.strengths_.push_back({f, fp, (fp + 1.0) * (two_J + 1.0) * w * w});
      }
    }
    // Zero-field branching ratios (closed form), and per excited sublevel the loss: the decay
    // into every ground state outside the model, summed explicitly over those states (with
    // Breit–Rabi mixing when it is on), so Σ_q A_q†A_q + loss = 1 is a completeness check.
    for (int fp : excited) {
      for (int f : allowed_g) {
        const double w = sixj(f, fp);
        const double b = (f + 1.0) * (two_Jp + 1.0) * w * w;
        const bool in_model = std::find(ground.begin(), ground.end(), f) != ground.end();
        ls.branching_.push_back({fp, f, b, in_model});
      }
    }
    for (std::size_t i = 0; i < ls.sublevels_.size(); ++i) {
      const auto& se = ls.sublevels_[i];
      if (!se.excited) continue;
      double loss = 0.0;
      for (int f : allowed_g) {
        if (std::find(ground.begin(), ground.end(), f) != ground.end()) continue;
        for (int two_m = -f; two_m <= f; two_m += 2) {
          const double a = amplitude(composition(f, two_m), two_m, se, reduced);
          loss += a * a;
        }
      }
      ls.loss_fraction_[i] = loss;
    }
    return ls;
  }

  static LevelStructure custom(const CustomAtom& a) {
    if (a.ground_2F < 0 || a.excited_2F < 0) {
      throw InputError("custom atom: F and F' must be ≥ 0");
    }
    if (!angular::triangle(a.ground_2F, a.excited_2F, 2)) {
      throw InputError("custom atom: F=" + half_string(a.ground_2F) + " -> F'=" + half_string(a.excited_2F) +
                       " is not an electric-dipole transition; allowed F': " +
                       list_string([&] {
                         std::vector<int> v;
                         for (int d = -2; d <= 2; d += 2) {
                           if (angular::triangle(a.ground_2F, a.ground_2F + d, 2)) v.push_back(a.ground_2F + d);
                         }
                         return v;
                       }()));
    }
    if (!std::isfinite(a.ground_gF) || !std::isfinite(a.excited_gF)) {
      throw InputError("custom atom: g_F values must be finite");
    }
    require_finite_positive(a.gamma_MHz, "custom atom: gamma (MHz)");
    require_finite_positive(a.wavelength_nm, "custom atom: wavelength (nm)");
    require_finite_nonneg(a.field_G, "field (gauss)");

    LevelStructure ls;
    ls.label_ = "custom atom";
    ls.two_I_ = 0;
    ls.two_J_ = a.ground_2F;
    ls.two_Jp_ = a.excited_2F;
    ls.gamma_rad_per_us_ = units::angular_from_MHz(a.gamma_MHz);
    ls.wavelength_nm_ = a.wavelength_nm;
    ls.line_frequency_MHz_ = constants::c_m_per_s / (a.wavelength_nm * 1e-9) * 1e-6;
    ls.reduced_dipole_C_m_ = species::reduced_dipole_from_gamma_ea0(a.gamma_MHz, a.wavelength_nm, a.ground_2F, a.excited_2F) *
                             constants::e_C * constants::a0_m;
    ls.field_G_ = a.field_G;
    std::vector<Level> levels = {{false, a.ground_2F, a.ground_gF, 0.0}, {true, a.excited_2F, a.excited_gF, 0.0}};
    fill_basis(ls, levels, [&](const Level& l, int two_m) {
      return l.gF * constants::muB_over_h_MHz_per_G * (two_m / 2.0) * a.field_G;
    });
    const double r = std::sqrt((a.excited_2F + 1.0) / (a.ground_2F + 1.0));
    fill_dipoles(ls, [&](int, int) { return r; }, [](int two_F, int) { return Composition{{two_F, 1.0}}; });
    ls.strengths_.push_back({a.ground_2F, a.excited_2F, 1.0});
    ls.branching_.push_back({a.excited_2F, a.ground_2F, 1.0, true});
    return ls;
  }
};

LevelStructure LevelStructure::from_species(const LevelRequest& request) { return LevelBuilder::species(request); }
LevelStructure LevelStructure::from_custom(const CustomAtom& atom) { return LevelBuilder::custom(atom); }

int LevelStructure::dimension() const { return static_cast<int>(sublevels_.size()); }
const std::vector<Sublevel>& LevelStructure::sublevels() const { return sublevels_; }
const std::vector<HyperfineLevel>& LevelStructure::hyperfine_levels() const { return hyperfine_; }

const Eigen::MatrixXd& LevelStructure::lowering(int q) const {
  FLYBY_CHECK(q >= -1 && q <= 1, "lowering(q) needs q in {-1, 0, +1}");
  return lowering_[q + 1];
}

double LevelStructure::gamma_rad_per_us() const { return gamma_rad_per_us_; }
double LevelStructure::line_frequency_MHz() const { return line_frequency_MHz_; }
double LevelStructure::wavelength_nm() const { return wavelength_nm_; }
double LevelStructure::reduced_dipole_C_m() const { return reduced_dipole_C_m_; }
double LevelStructure::field_G() const { return field_G_; }

double LevelStructure::loss_fraction(int i) const {
  FLYBY_CHECK(i >= 0 && i < dimension(), "loss_fraction: sublevel index out of range");
  return loss_fraction_[static_cast<std::size_t>(i)];
}

std::vector<LevelStructure::Strength> LevelStructure::strengths() const { return strengths_; }
std::vector<LevelStructure::Branching> LevelStructure::branching() const { return branching_; }
const std::string& LevelStructure::label() const { return label_; }
int LevelStructure::two_I() const { return two_I_; }
int LevelStructure::two_J() const { return two_J_; }
int LevelStructure::two_Jp() const { return two_Jp_; }
GroundZeeman LevelStructure::ground_zeeman() const { return ground_zeeman_; }
const std::vector<std::string>& LevelStructure::notes() const { return notes_; }

std::vector<int> LevelStructure::allowed_2F(int two_I, int two_J) {
  std::vector<int> v;
  for (int f = std::abs(two_I - two_J); f <= two_I + two_J; f += 2) v.push_back(f);
  return v;
}

}  // namespace flyby::levels
