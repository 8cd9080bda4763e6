// Level structure of one atom: the Zeeman sublevels of the included ground and excited hyperfine
// levels of one optical line, their energies in a magnetic field, and the dipole lowering
// operators A_q between them. This is the contract between the physics (models/) and the engine,
// which only sees matrices on a basis of sublevels.
//
// Conventions (shared/DESIGN.md §3):
//  * Basis order: ground sublevels first, then excited; within each, hyperfine levels by
//    ascending F, sublevels by ascending m. Quantization axis along B.
//  * Energies are angular frequencies in rad/µs, measured from the centroid (hyperfine-free
//    energy) of the level's own J manifold; the optical frequency between the two centroids is
//    line_frequency_MHz(). A rotating frame is chosen later by the scenario, not here.
//  * A_q (q = −1, 0, +1) is dimensionless: ⟨g|A_q|e⟩ = ⟨F_g m_g| d_q |F_e m_e⟩ / ⟨J‖d‖J′⟩ times
//    the factor that makes Σ_q Σ_g |⟨g|A_q|e⟩|² over *all* ground levels of the line equal 1 for
//    every excited sublevel e (Wigner–Eckart theorem with the 6j reduction, Condon–Shortley
//    phases). d_q is the spherical component of the dipole operator, so ⟨g|A_q|e⟩ ≠ 0 only for
//    m_g = m_e + q: A_{−1} lowers m by one (the atom emits σ+ light, angular momentum +1 along
//    the axis), A_{+1} raises it (σ− light), A_0 keeps it (π light).
//  * The physical decay of excited sublevel e is Γ; the part into ground levels that are in the
//    model is Γ Σ_q ⟨e|A_q†A_q|e⟩, the rest is loss_fraction(e) (counted, never dropped).
//  * Reduced elements follow Steck's alkali D-line notes (coupling order |J I F⟩):
//      ⟨F‖d‖F′⟩ = ⟨J‖d‖J′⟩ (−1)^(F′+J+1+I) √((2F′+1)(2J+1)) {J J′ 1; F′ F I},
//      ⟨F m|d_q|F′ m′⟩ = ⟨F‖d‖F′⟩ ⟨F m|F′ m′; 1 q⟩,
//    so ⟨g|A_q|e⟩ = (−1)^(F′+J+1+I) √((2F′+1)(2J′+1)) {J J′ 1; F′ F I} ⟨F m_g|F′ m_e; 1 q⟩.
//  * Zeeman shifts: +μB g_F m B (Steck's sign, μ = −μB g m) for every level by default. With
//    GroundZeeman::kBreitRabi the ground (J = 1/2) states are the exact eigenstates of
//    A I·J + μB B (g_J J_z + g_I I_z): energies from the Breit–Rabi formula, and A_q and the
//    loss computed with the eigenvectors, which mix F = I ± 1/2 of the same m. Each is
//    labelled by the (F, m) it connects to at B → 0, with a positive |F m⟩ component. The
//    excited levels are always linear, valid while μB B ≪ their hyperfine splittings (see
//    notes()).
#pragma once

#include <Eigen/Dense>
#include <string>
#include <vector>

namespace flyby::levels {

enum class Line { kD1, kD2 };
enum class GroundZeeman { kLinear, kBreitRabi };

// What to build for a species from the handbook table (models/species).
struct LevelRequest {
  std::string species;             // "Rb87", "Rb85", "Cs133", "Na23", "K39"
  Line line = Line::kD2;
  std::vector<int> ground_2F;      // twice the ground F values to include, e.g. {4} for F = 2
  std::vector<int> excited_2F;     // twice the excited F′ values to include
  double field_G = 0.0;            // magnetic field magnitude, gauss, ≥ 0
  GroundZeeman ground_zeeman = GroundZeeman::kLinear;
};

// A model atom given directly (one ground F, one excited F′), for tests and custom lines.
// The transition is closed (loss 0) with A_q = √((2F′+1)/(2F+1)) ⟨F m_g|F′ m_e; 1 q⟩, and the
// reduced dipole element is derived from Γ and λ as if F, F′ were J, J′.
struct CustomAtom {
  int ground_2F = 1;               // twice F of the ground level
  int excited_2F = 3;              // twice F′ of the excited level; |F − F′| ≤ 1, not both 0
  double ground_gF = 0.0;          // Landé g_F of the ground level
  double excited_gF = 0.0;         // Landé g_F of the excited level
  double gamma_MHz = 6.0;          // Γ/2π, MHz, > 0 (population decay rate, natural FWHM)
  double wavelength_nm = 780.0;    // vacuum wavelength, nm, > 0
  double field_G = 0.0;            // magnetic field magnitude, gauss, ≥ 0
};

// One basis state.
struct Sublevel {
  bool excited = false;
  int two_F = 0;                   // 2F
  int two_m = 0;                   // 2m
  double energy_rad_per_us = 0.0;  // from the J centroid, see the file comment
};

// One hyperfine level as included in the model.
struct HyperfineLevel {
  bool excited = false;
  int two_F = 0;
  double gF = 0.0;                 // Landé g_F (including the nuclear g_I term)
  double hyperfine_shift_MHz = 0.0;  // zero-field shift from the J centroid, MHz
};

class LevelStructure {
 public:
  // Build from the species table; throws flyby::InputError naming the allowed values when the
  // species, line or an F value is not possible.
  static LevelStructure from_species(const LevelRequest& request);
  // Build a custom model atom; throws flyby::InputError on unphysical values.
  static LevelStructure from_custom(const CustomAtom& atom);

  int dimension() const;
  const std::vector<Sublevel>& sublevels() const;
  const std::vector<HyperfineLevel>& hyperfine_levels() const;

  // Dipole lowering operator A_q, q ∈ {−1, 0, +1}: a dimension × dimension real matrix with
  // nonzero elements ⟨g|A_q|e⟩ only from excited to ground sublevels with m_g = m_e + q.
  const Eigen::MatrixXd& lowering(int q) const;

  double gamma_rad_per_us() const;      // Γ
  double line_frequency_MHz() const;    // optical frequency between the J centroids, MHz
  double wavelength_nm() const;         // vacuum wavelength of the line
  double reduced_dipole_C_m() const;    // ⟨J‖e r‖J′⟩ in C·m (Steck's convention)
  double field_G() const;

  // Fraction of excited sublevel i's decay (index into sublevels()) that goes to ground levels
  // not in the model; 0 for ground sublevels. Equals the zero-field branching into the
  // excluded levels, except with Breit–Rabi mixing (then it depends slightly on m′ and B).
  double loss_fraction(int i) const;

  // Relative strength S_FF′ = (2F′+1)(2J+1){J J′ 1; F′ F I}² of each included pair (ground
  // F ascending, then F′ ascending); Σ over all F′ of the line of S_FF′ = 1. Custom atom: 1.
  struct Strength {
    int ground_2F, excited_2F;
    double S;
  };
  std::vector<Strength> strengths() const;

  // Branching ratio of each included excited F′ into each ground F of the line (in the model or
  // not): the fraction of the population decay of any sublevel of F′ that ends in level F,
  // summed over polarizations and m, b(F′→F) = (2F+1)(2J′+1){J J′ 1; F′ F I}² (independent of
  // m′; Σ_F b = 1; zero-field values). Entries with in_model = false are the loss channels.
  // Custom atom: one entry 1.
  struct Branching {
    int excited_2F, ground_2F;
    double fraction;
    bool in_model;
  };
  std::vector<Branching> branching() const;

  // Description of what was built.
  const std::string& label() const;     // e.g. "87Rb D2" or "custom atom"
  int two_I() const;                    // 2I (0 for a custom atom)
  int two_J() const;                    // 2J of the ground level (2F for a custom atom)
  int two_Jp() const;                   // 2J′ of the excited level (2F′ for a custom atom)
  GroundZeeman ground_zeeman() const;

  // Warnings about the validity of the model at this field, one line each (empty when none):
  // linear ground Zeeman shifts that differ from Breit–Rabi by more than 1 kHz, and excited
  // levels whose Zeeman energy g_J′ μB B exceeds 10 % of the smallest F′ spacing of the line.
  const std::vector<std::string>& notes() const;

  // The 2F values allowed for nuclear spin I and electronic J: |J − I| … J + I.
  static std::vector<int> allowed_2F(int two_I, int two_J);

 private:
  LevelStructure() = default;
  friend class LevelBuilder;
  std::vector<Sublevel> sublevels_;
  std::vector<HyperfineLevel> hyperfine_;
  Eigen::MatrixXd lowering_[3];
  std::vector<double> loss_fraction_;
  std::vector<Strength> strengths_;
  std::vector<Branching> branching_;
  std::string label_;
  int two_I_ = 0, two_J_ = 0, two_Jp_ = 0;
  GroundZeeman ground_zeeman_ = GroundZeeman::kLinear;
  std::vector<std::string> notes_;
  double gamma_rad_per_us_ = 0.0;
  double line_frequency_MHz_ = 0.0;
  double wavelength_nm_ = 0.0;
  double reduced_dipole_C_m_ = 0.0;
  double field_G_ = 0.0;
};

}  // namespace flyby::levels
