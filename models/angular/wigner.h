// Wigner 3j and 6j symbols and Clebsch–Gordan coefficients for integer and half-integer
// arguments, Condon–Shortley phase convention (A. R. Edmonds, "Angular Momentum in Quantum
// Mechanics" (1957), eqs. 3.6.11 and 6.3.7 — the Racah formulas).
//
// Every argument is passed doubled (two_j = 2j, two_m = 2m) so half-integers are exact ints.
// Arguments that violate a selection rule (triangle condition, m sum, |m| ≤ j, j + m integer)
// give exactly 0; a negative 2j throws flyby::InputError.
//
// Accuracy: the Racah sums are evaluated exactly (prime-factorised factorials and an exact
// multi-precision integer sum, see wigner.cpp), so the only rounding is in the final square
// root and product: the relative error is a few units of long-double precision (~1e-18),
// i.e. the result is correctly rounded to double up to about one ulp for any j whose result
// fits in long double (tested to 1e-13 against GSL and SymPy up to j = 10).
#pragma once

namespace flyby::angular {

// Wigner 3j symbol (j1 j2 j3; m1 m2 m3).
double wigner_3j(int two_j1, int two_j2, int two_j3, int two_m1, int two_m2, int two_m3);

// Wigner 6j symbol {j1 j2 j3; j4 j5 j6}.
double wigner_6j(int two_j1, int two_j2, int two_j3, int two_j4, int two_j5, int two_j6);

// Clebsch–Gordan coefficient ⟨j1 m1; j2 m2 | J M⟩ = (−1)^(j1−j2+M) √(2J+1) (j1 j2 J; m1 m2 −M).
double clebsch_gordan(int two_j1, int two_m1, int two_j2, int two_m2, int two_J, int two_M);

// Triangle condition |a − b| ≤ c ≤ a + b with a + b + c integer (arguments doubled).
bool triangle(int two_a, int two_b, int two_c);

}  // namespace flyby::angular
