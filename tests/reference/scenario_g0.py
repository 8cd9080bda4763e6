#!/usr/bin/python3
"""Independent check values for tests/models/scenario_resonator_test.cpp.

g0 = d sqrt(omega / (2 hbar eps0 V)), V = pi w0^2 L / 4, for 87Rb D2 with the unit-weight dipole
d = <J||er||J'> sqrt((2J+1)/(2J'+1)) = 4.22752 e a0 / sqrt(2) (Steck, "Rubidium 87 D Line Data"
[memory], via shared/REFERENCES.md), lambda = 780.241209686 nm, L = 0.5 mm, w0 = 30 um.
Also the unit-weight saturation intensity I_sat = c eps0 Gamma^2 hbar^2 / (4 d^2) for Gamma from
the same d. Constants: scipy.constants (CODATA 2018 in Debian 12's SciPy).
Run: /usr/bin/python3 tests/reference/scenario_g0.py
"""
import numpy as np
from scipy import constants as k

assert k.physical_constants["Bohr radius"][0] == 5.29177210903e-11, "expects CODATA 2018"
d = 4.22752 * k.e * k.physical_constants["Bohr radius"][0] / np.sqrt(2.0)
lam = 780.241209686e-9
L, w0 = 0.5e-3, 30e-6
omega = 2 * np.pi * k.c / lam
V = np.pi * w0**2 * L / 4
g0 = d * np.sqrt(omega / (2 * k.hbar * k.epsilon_0 * V))
print("g0/2pi [MHz] = %.9f" % (g0 / (2 * np.pi) / 1e6))
gamma = omega**3 * d**2 / (3 * np.pi * k.epsilon_0 * k.hbar * k.c**3)
print("Gamma/2pi [MHz] = %.9f, tau [ns] = %.6f" % (gamma / (2 * np.pi) / 1e6, 1e9 / gamma))
isat = k.c * k.epsilon_0 * gamma**2 * k.hbar**2 / (4 * d**2)
print("I_sat [mW/cm^2] = %.9f" % (isat / 10))
