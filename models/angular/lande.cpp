// Landé g-factors (see lande.h for the sign convention).
#include "models/angular/lande.h"

namespace flyby::angular {

double lande_gJ(int two_L, int two_S, int two_J, double g_L, double g_S) {
  if (two_J == 0) return 0.0;
  const double J = two_J / 2.0, L = two_L / 2.0, S = two_S / 2.0;
  const double jj = J * (J + 1), ll = L * (L + 1), ss = S * (S + 1);
  return g_L * (jj - ss + ll) / (2 * jj) + g_S * (jj + ss - ll) / (2 * jj);
}

double lande_gF(int two_F, int two_J, int two_I, double gJ, double gI) {
  if (two_F == 0) return 0.0;
  const double F = two_F / 2.0, J = two_J / 2.0, I = two_I / 2.0;
  const double ff = F * (F + 1), jj = J * (J + 1), ii = I * (I + 1);
  return gJ * (ff - ii + jj) / (2 * ff) + gI * (ff + ii - jj) / (2 * ff);
}

}  // namespace flyby::angular
