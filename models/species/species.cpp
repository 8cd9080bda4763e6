// Species table of the alkali D lines. Every value carries its source; all were recalled from
// memory of the cited handbook notes (no copy of the notes was at hand), so each is marked
// [memory] with the revision recalled, and the tests cross-check them against closed forms
// and shared/REFERENCES.md where possible. Where the recall of a reduced dipole element was
// not trusted, it is derived from Γ and λ ("[derived from Γ]") by
//   Γ = ω³/(3π ε0 ħ c³) · (2J+1)/(2J′+1) · |⟨J‖e r‖J′⟩|²       (Steck's convention).
//
// Sources:
//  [Steck87]  D. A. Steck, "Rubidium 87 D Line Data", revision 2.2.1 (21 November 2019) [memory]
//  [Steck85]  D. A. Steck, "Rubidium 85 D Line Data", revision 2.2.1 (21 November 2019) [memory]
//  [SteckCs]  D. A. Steck, "Cesium D Line Data", revision 2.2.1 (21 November 2019) [memory];
//             older revisions (≤ 2.1.4) had Γ/2π(D2) = 5.2227 MHz, A(6P1/2) = 291.920 MHz.
//  [SteckNa]  D. A. Steck, "Sodium D Line Data", revision 2.2.1 (21 November 2019) [memory]
//  [Tiecke]   T. G. Tiecke, "Properties of Potassium", v1.02 (May 2019) [memory]
// The D2 rows of 87Rb, 85Rb and 133Cs and the ground-state rows of all five species are also
// listed in shared/REFERENCES.md, where they were recalled independently.
#include "models/species/species.h"

#include <algorithm>
#include <cctype>
#include <cmath>

#include "engine/common/constants.h"
#include "engine/common/errors.h"

namespace flyby::species {
namespace {

SpeciesData make_rb87() {
  SpeciesData s;
  s.name = "Rb87";
  s.description = "87Rb";
  s.two_I = 3;                          // I = 3/2                      [Steck87] [memory; also REFERENCES.md]
  s.mass_u = 86.909180520;              // u                            [Steck87] [memory; also REFERENCES.md]
  s.ground_gJ = 2.00233113;             // g_J(5S1/2)                   [Steck87] [memory; also REFERENCES.md]
  s.gI = -0.0009951414;                 // g_I                          [Steck87] [memory; also REFERENCES.md]
  s.ground_A_MHz = 3417.341305452145;   // A(5S1/2), MHz                [Steck87] [memory; also REFERENCES.md]
  // D2: 5S1/2 → 5P3/2
  s.d2.two_Jp = 3;
  s.d2.wavelength_nm = 780.241209686;   // vacuum                       [Steck87] [memory; also REFERENCES.md]
  s.d2.gamma_MHz = 6.0666;              // Γ/2π (τ = 26.2348 ns)        [Steck87] [memory; also REFERENCES.md]
  s.d2.excited_gJ = 1.3362;             // g_J(5P3/2)                   [Steck87] [memory; also REFERENCES.md]
  s.d2.excited_A_MHz = 84.7185;         // A(5P3/2)                     [Steck87] [memory; also REFERENCES.md]
  s.d2.excited_B_MHz = 12.4965;         // B(5P3/2)                     [Steck87] [memory; also REFERENCES.md]
  s.d2.reduced_dipole_ea0 = 4.22752;    // ⟨J=1/2‖er‖J′=3/2⟩            [Steck87] [memory; also REFERENCES.md]
  // D1: 5S1/2 → 5P1/2
  s.d1.two_Jp = 1;
  s.d1.wavelength_nm = 794.978851156;   // vacuum                       [Steck87] [memory]
  s.d1.gamma_MHz = 5.7500;              // Γ/2π (τ = 27.679 ns)         [Steck87] [memory]
  s.d1.excited_gJ = 0.666;              // g_J(5P1/2) (LS value)        [Steck87] [memory]
  s.d1.excited_A_MHz = 408.328;         // A(5P1/2); rev. ≤ 2.0 gave 406.2–407.25 [Steck87] [memory]
  s.d1.excited_B_MHz = 0.0;             // no quadrupole for J′ = 1/2
  s.d1.dipole_derived_from_gamma = true;  // [derived from Γ]
  return s;
}

SpeciesData make_rb85() {
  SpeciesData s;
  s.name = "Rb85";
  s.description = "85Rb";
  s.two_I = 5;                          // I = 5/2                      [Steck85] [memory; also REFERENCES.md]
  s.mass_u = 84.911789732;              // u                            [Steck85] [memory; also REFERENCES.md]
  s.ground_gJ = 2.00233113;             // g_J(5S1/2)                   [Steck85] [memory; also REFERENCES.md]
  s.gI = -0.00029364000;                // g_I                          [Steck85] [memory; also REFERENCES.md]
  s.ground_A_MHz = 1011.9108130;        // A(5S1/2)                     [Steck85] [memory; also REFERENCES.md]
  s.d2.two_Jp = 3;
  s.d2.wavelength_nm = 780.241368271;   // vacuum                       [Steck85] [memory; also REFERENCES.md]
  s.d2.gamma_MHz = 6.0666;              // Γ/2π                         [Steck85] [memory; also REFERENCES.md]
  s.d2.excited_gJ = 1.3362;             // g_J(5P3/2)                   [Steck85] [memory; also REFERENCES.md]
  s.d2.excited_A_MHz = 25.0020;         // A(5P3/2)                     [Steck85] [memory; also REFERENCES.md]
  s.d2.excited_B_MHz = 25.790;          // B(5P3/2)                     [Steck85] [memory; also REFERENCES.md]
  s.d2.dipole_derived_from_gamma = true;  // [derived from Γ] (Steck lists ≈ the 87Rb value)
  s.d1.two_Jp = 1;
  s.d1.wavelength_nm = 794.979014933;   // vacuum                       [Steck85] [memory]
  s.d1.gamma_MHz = 5.7500;              // Γ/2π                         [Steck85] [memory]
  s.d1.excited_gJ = 0.666;              // g_J(5P1/2)                   [Steck85] [memory]
  s.d1.excited_A_MHz = 120.527;         // A(5P1/2)                     [Steck85] [memory]
  s.d1.dipole_derived_from_gamma = true;  // [derived from Γ]
  return s;
}

SpeciesData make_cs133() {
  SpeciesData s;
  s.name = "Cs133";
  s.description = "133Cs";
  s.two_I = 7;                          // I = 7/2                      [SteckCs] [memory; also REFERENCES.md]
  s.mass_u = 132.905451931;             // u                            [SteckCs] [memory; also REFERENCES.md]
  s.ground_gJ = 2.00254032;             // g_J(6S1/2)                   [SteckCs] [memory; also REFERENCES.md]
  s.gI = -0.00039885395;                // g_I                          [SteckCs] [memory; also REFERENCES.md]
  s.ground_A_MHz = 2298.1579425;        // A(6S1/2) (defines the SI second) [SteckCs] [memory; also REFERENCES.md]
  s.d2.two_Jp = 3;
  s.d2.wavelength_nm = 852.34727582;    // vacuum                       [SteckCs] [memory; also REFERENCES.md]
  s.d2.gamma_MHz = 5.234;               // Γ/2π (τ = 30.405 ns)         [SteckCs] [memory; also REFERENCES.md]
  s.d2.excited_gJ = 1.3340;             // g_J(6P3/2)                   [SteckCs] [memory; also REFERENCES.md]
  s.d2.excited_A_MHz = 50.28827;        // A(6P3/2)                     [SteckCs] [memory; also REFERENCES.md]
  s.d2.excited_B_MHz = -0.4934;         // B(6P3/2)                     [SteckCs] [memory; also REFERENCES.md]
  s.d2.reduced_dipole_ea0 = 4.4837;     // ⟨J=1/2‖er‖J′=3/2⟩            [SteckCs] [memory; also REFERENCES.md]
  s.d1.two_Jp = 1;
  s.d1.wavelength_nm = 894.59295986;    // vacuum                       [SteckCs] [memory]
  s.d1.gamma_MHz = 4.575;               // Γ/2π (τ = 34.79 ns); older 4.5612 [SteckCs] [memory]
  s.d1.excited_gJ = 0.66590;            // g_J(6P1/2)                   [SteckCs] [memory]
  s.d1.excited_A_MHz = 291.9309;        // A(6P1/2)                     [SteckCs] [memory]
  s.d1.dipole_derived_from_gamma = true;  // [derived from Γ]
  return s;
}

SpeciesData make_na23() {
  SpeciesData s;
  s.name = "Na23";
  s.description = "23Na";
  s.two_I = 3;                          // I = 3/2                      [SteckNa] [memory; also REFERENCES.md]
  s.mass_u = 22.9897692807;             // u                            [SteckNa] [memory]
  s.ground_gJ = 2.00229600;             // g_J(3S1/2)                   [SteckNa] [memory]
  s.gI = -0.00080461080;                // g_I                          [SteckNa] [memory; also REFERENCES.md]
  s.ground_A_MHz = 885.8130644;         // A(3S1/2)                     [SteckNa] [memory; also REFERENCES.md]
  s.d2.two_Jp = 3;
  s.d2.wavelength_nm = 589.1583264;     // vacuum                       [SteckNa] [memory; also REFERENCES.md]
  s.d2.gamma_MHz = 9.7946;              // Γ/2π (τ = 16.2492 ns)        [SteckNa] [memory; also REFERENCES.md]
  s.d2.excited_gJ = 1.33420;            // g_J(3P3/2)                   [SteckNa] [memory]
  s.d2.excited_A_MHz = 18.534;          // A(3P3/2)                     [SteckNa] [memory]
  s.d2.excited_B_MHz = 2.724;           // B(3P3/2)                     [SteckNa] [memory]
  s.d2.dipole_derived_from_gamma = true;  // [derived from Γ]
  s.d1.two_Jp = 1;
  s.d1.wavelength_nm = 589.7558147;     // vacuum                       [SteckNa] [memory]
  s.d1.gamma_MHz = 9.765;               // Γ/2π (τ = 16.299 ns)         [SteckNa] [memory]
  s.d1.excited_gJ = 0.66581;            // g_J(3P1/2)                   [SteckNa] [memory]
  s.d1.excited_A_MHz = 94.44;           // A(3P1/2)                     [SteckNa] [memory]
  s.d1.dipole_derived_from_gamma = true;  // [derived from Γ]
  return s;
}

SpeciesData make_k39() {
  SpeciesData s;
  s.name = "K39";
  s.description = "39K";
  s.two_I = 3;                          // I = 3/2                      [Tiecke] [memory; also REFERENCES.md]
  s.mass_u = 38.96370668;               // u                            [Tiecke] [memory]
  s.ground_gJ = 2.00229421;             // g_J(4S1/2)                   [Tiecke] [memory]
  s.gI = -0.00014193489;                // g_I                          [Tiecke] [memory; also REFERENCES.md]
  s.ground_A_MHz = 230.8598601;         // A(4S1/2)                     [Tiecke] [memory; also REFERENCES.md]
  s.d2.two_Jp = 3;
  s.d2.wavelength_nm = 766.700921822;   // vacuum                       [Tiecke] [memory; also REFERENCES.md]
  s.d2.gamma_MHz = 6.035;               // Γ/2π (τ = 26.37 ns)          [Tiecke] [memory; also REFERENCES.md]
  s.d2.excited_gJ = 4.0 / 3.0;          // g_J(4P3/2), LS value as listed [Tiecke] [memory]
  s.d2.excited_A_MHz = 6.093;           // A(4P3/2)                     [Tiecke] [memory]
  s.d2.excited_B_MHz = 2.786;           // B(4P3/2)                     [Tiecke] [memory]
  s.d2.dipole_derived_from_gamma = true;  // [derived from Γ]
  s.d1.two_Jp = 1;
  s.d1.wavelength_nm = 770.108385049;   // vacuum                       [Tiecke] [memory]
  s.d1.gamma_MHz = 5.956;               // Γ/2π (τ = 26.72 ns)          [Tiecke] [memory]
  s.d1.excited_gJ = 2.0 / 3.0;          // g_J(4P1/2), LS value as listed [Tiecke] [memory]
  s.d1.excited_A_MHz = 27.775;          // A(4P1/2)                     [Tiecke] [memory]
  s.d1.dipole_derived_from_gamma = true;  // [derived from Γ]
  return s;
}

// Fills the reduced dipole elements marked as derived.
SpeciesData finish(SpeciesData s) {
  for (LineData* l : {&s.d1, &s.d2}) {
    if (l->dipole_derived_from_gamma) {
      l->reduced_dipole_ea0 = reduced_dipole_from_gamma_ea0(l->gamma_MHz, l->wavelength_nm, 1, l->two_Jp);
    }
  }
  return s;
}

const std::vector<SpeciesData>& table() {
  static const std::vector<SpeciesData> t = {finish(make_rb87()), finish(make_rb85()),
                                             finish(make_cs133()), finish(make_na23()),
                                             finish(make_k39())};
  return t;
}

std::string joined_names() {
  std::string s;
  for (const auto& d : table()) s += (s.empty() ? "" : ", ") + d.name;
  return s;
}

double omega_cubed_factor(double wavelength_nm, int two_J, int two_Jp) {
  using namespace flyby::constants;
  const double omega = 2.0 * kPi * c_m_per_s / (wavelength_nm * 1e-9);
  return omega * omega * omega / (3.0 * kPi * eps0_F_per_m * hbar_J_s * c_m_per_s * c_m_per_s * c_m_per_s) *
         (two_J + 1.0) / (two_Jp + 1.0);
}

}  // namespace

const SpeciesData& lookup(const std::string& name) {
  for (const auto& d : table()) {
    if (d.name == name) return d;
  }
  throw InputError("unknown species '" + name + "'; allowed: " + joined_names());
}

std::vector<std::string> names() {
  std::vector<std::string> n;
  for (const auto& d : table()) n.push_back(d.name);
  return n;
}

LineId line_from_string(const std::string& s) {
  std::string u = s;
  std::transform(u.begin(), u.end(), u.begin(), [](unsigned char c) { return std::toupper(c); });
  if (u == "D1") return LineId::kD1;
  if (u == "D2") return LineId::kD2;
  throw InputError("unknown line '" + s + "'; allowed: D1, D2");
}

std::string to_string(LineId id) { return id == LineId::kD1 ? "D1" : "D2"; }

double reduced_dipole_from_gamma_ea0(double gamma_MHz, double wavelength_nm, int two_J, int two_Jp) {
  using namespace flyby::constants;
  const double gamma_per_s = 2.0 * kPi * gamma_MHz * 1e6;
  const double d_Cm = std::sqrt(gamma_per_s / omega_cubed_factor(wavelength_nm, two_J, two_Jp));
  return d_Cm / (e_C * a0_m);
}

double gamma_from_reduced_dipole_MHz(double dipole_ea0, double wavelength_nm, int two_J, int two_Jp) {
  using namespace flyby::constants;
  const double d_Cm = dipole_ea0 * e_C * a0_m;
  return omega_cubed_factor(wavelength_nm, two_J, two_Jp) * d_Cm * d_Cm / (2.0 * kPi * 1e6);
}

}  // namespace flyby::species
