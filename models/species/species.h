// Handbook data of the alkali D lines that flyby knows by name: nuclear spin, mass, and for the
// ground level and each line's excited level the vacuum wavelength, Γ, g_J, hyperfine A and B,
// and the reduced dipole matrix element. Sources (with revision) are beside each value in
// species.cpp; values recalled from memory are marked [memory] there.
#pragma once

#include <string>
#include <vector>

namespace flyby::species {

enum class LineId { kD1, kD2 };

// One optical line nS1/2 → nP_{J′}.
struct LineData {
  int two_Jp = 3;                  // 2J′ of the excited level (1 for D1, 3 for D2)
  double wavelength_nm = 0.0;      // vacuum wavelength, nm
  double gamma_MHz = 0.0;          // Γ/2π, MHz (population decay rate of the excited level)
  double excited_gJ = 0.0;         // Landé g_J of the excited level
  double excited_A_MHz = 0.0;      // magnetic-dipole hyperfine constant A of the excited level, MHz
  double excited_B_MHz = 0.0;      // electric-quadrupole constant B, MHz (0 for J′ = 1/2)
  double reduced_dipole_ea0 = 0.0; // ⟨J=1/2‖e r‖J′⟩ in units of e·a0 (Steck's convention)
  bool dipole_derived_from_gamma = false;  // true when computed from Γ and λ (see species.cpp)
};

struct SpeciesData {
  std::string name;                // "Rb87", ...
  std::string description;         // "87Rb", for tables
  int two_I = 3;                   // 2I
  double mass_u = 0.0;             // atomic mass, u
  double ground_gJ = 0.0;          // g_J of nS1/2
  double gI = 0.0;                 // nuclear g-factor, Steck's sign convention (see angular/lande.h)
  double ground_A_MHz = 0.0;       // hyperfine A of nS1/2, MHz
  LineData d1;
  LineData d2;
  const LineData& line(LineId id) const { return id == LineId::kD1 ? d1 : d2; }
};

// The data of a species by name ("Rb87", "Rb85", "Cs133", "Na23", "K39"); throws
// flyby::InputError listing the allowed names for any other name.
const SpeciesData& lookup(const std::string& name);

// All names lookup() accepts, in table order.
std::vector<std::string> names();

// "D1" / "D2" (case-insensitive) → LineId; throws InputError naming the allowed values.
LineId line_from_string(const std::string& s);
std::string to_string(LineId id);

// |⟨J‖e r‖J′⟩| in e·a0 from Γ and λ: Γ = ω³/(3π ε0 ħ c³) · (2J+1)/(2J′+1) · |⟨J‖e r‖J′⟩|²
// (Steck, alkali D-line data notes, eq. for the spontaneous decay rate).
double reduced_dipole_from_gamma_ea0(double gamma_MHz, double wavelength_nm, int two_J, int two_Jp);
// Inverse: Γ/2π in MHz from the reduced dipole element.
double gamma_from_reduced_dipole_MHz(double dipole_ea0, double wavelength_nm, int two_J, int two_Jp);

}  // namespace flyby::species
