#!/usr/bin/python3
"""Independent reference for the engine's master-equation solver: an F = 1 -> F' = 2 atom in a
magnetic field (quantization axis along B), driven with linear polarization tilted by theta from
B, computed with numpy/scipy (dense Liouvillian, scipy.linalg.expm) and Clebsch-Gordan
coefficients from sympy.physics.wigner (Condon-Shortley phases).

The model is defined in tests/engine/engine_test_models.h (multilevel()):
  basis: ground m = -1, 0, 1, then excited m' = -2..2
  A_q = sum_m <1 m; 1 q | 2 m+q> |1 m><2 m+q|,  q = -1, 0, +1
  H = sum_m zg*m |m><m| + sum_m' (ze*m' - delta) |m'><m'| + (omega/2)(D + D^dagger),
  D = sum_q c_q A_q^dagger, c_{-1} = sin(theta)/sqrt2, c_0 = cos(theta), c_{+1} = -sin(theta)/sqrt2
  collapse operators sqrt(gamma) A_q.
Usage: multilevel_master.py gamma omega delta theta zg ze tau1 tau2 ...
Prints JSON: steady-state density matrix (re, im, row-major), channel rates, and the
normalized cross-correlation g2_ab(tau) for every channel pair (a, b)."""
import json
import sys

import numpy as np
import scipy.linalg
from sympy import S
from sympy.physics.wigner import clebsch_gordan


def main():
    gamma, omega, delta, theta, zg, ze = (float(x) for x in sys.argv[1:7])
    taus = [float(x) for x in sys.argv[7:]]
    ng, ne = 3, 5
    d = ng + ne
    a = []
    for q in (-1, 0, 1):
        m_q = np.zeros((d, d), dtype=complex)
        for i, m in enumerate(range(-1, 2)):
            for j, mp in enumerate(range(-2, 3)):
                if mp == m + q:
                    m_q[i, ng + j] = float(clebsch_gordan(S(1), S(1), S(2), S(m), S(q), S(mp)))
        a.append(m_q)
    h = np.zeros((d, d), dtype=complex)
    for i, m in enumerate(range(-1, 2)):
        h[i, i] = zg * m
    for j, mp in enumerate(range(-2, 3)):
        h[ng + j, ng + j] = ze * mp - delta
    c = [np.sin(theta) / np.sqrt(2), np.cos(theta), -np.sin(theta) / np.sqrt(2)]
    raise_op = sum(ck * ak.conj().T for ck, ak in zip(c, a))
    h = h + omega / 2 * (raise_op + raise_op.conj().T)
    cs = [np.sqrt(gamma) * ak for ak in a]
    ident = np.eye(d)
    # Column stacking: vec(A X B) = (B^T kron A) vec(X).
    liou = -1j * (np.kron(ident, h) - np.kron(h.T, ident))
    for cc in cs:
        ctc = cc.conj().T @ cc
        liou += np.kron(cc.conj(), cc) - 0.5 * np.kron(ident, ctc) - 0.5 * np.kron(ctc.T, ident)
    # Steady state: null vector of L (SVD), normalized to unit trace.
    _, _, vh = np.linalg.svd(liou)
    rho = vh[-1].conj().reshape((d, d), order="F")
    rho = rho / np.trace(rho)
    rho = 0.5 * (rho + rho.conj().T)
    rates = [float(np.real(np.trace(cc.conj().T @ cc @ rho))) for cc in cs]
    g2 = {}
    for ia, ca in enumerate(cs):
        x = (ca @ rho @ ca.conj().T).reshape(-1, order="F")
        for ib, cb in enumerate(cs):
            nb = cb.conj().T @ cb
            vals = []
            for tau in taus:
                y = (scipy.linalg.expm(liou * tau) @ x).reshape((d, d), order="F")
                vals.append(float(np.real(np.trace(nb @ y))) / (rates[ia] * rates[ib]))
            g2[f"{ia}{ib}"] = vals
    print(json.dumps({"rho_re": rho.real.reshape(-1).tolist(), "rho_im": rho.imag.reshape(-1).tolist(),
                      "rates": rates, "taus": taus, "g2": g2}))


if __name__ == "__main__":
    main()
