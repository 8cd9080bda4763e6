#!/usr/bin/python3
"""Plain numpy/scipy implementation of the engine's waiting-time quantum-jump algorithm, for a
speed comparison with bench/bench_engine.cpp (BM_TwoLevel, BM_Rb87TwelveLevel): same models,
same units (rad/us, Gamma = 2 pi 6.0666 MHz), same algorithm: H_eff = H - (i/2) sum C^dag C
diagonalized once (numpy.linalg.eig); draw r; bracket ||psi(t)||^2 = r by doubling from 1/max|lambda|;
locate the root with scipy.optimize.brentq to xtol = 1e-7 us; choose the channel by ||C psi||^2;
jump, renormalize, repeat. Run: /usr/bin/python3 bench/scipy_waiting_time.py [seconds_per_problem]
Prints JSON with jumps_per_s per problem."""
import json
import math
import sys
import time

import numpy as np
import scipy.optimize
from sympy import S
from sympy.physics.wigner import clebsch_gordan

GAMMA = 2 * math.pi * 6.0666


def two_level():
    sm = np.array([[0, 1], [0, 0]], dtype=complex)
    h = GAMMA / 2 * (sm + sm.conj().T)
    return h, [math.sqrt(GAMMA) * sm], np.array([1, 0], dtype=complex), 20.0


def rb_atom():
    ng, ne, d = 5, 7, 12
    a = []
    for q in (-1, 0, 1):
        m = np.zeros((d, d), dtype=complex)
        for i in range(ng):
            for j in range(ne):
                tm, tmp = -2 + i, -3 + j
                if tmp == tm + q:
                    m[i, ng + j] = float(clebsch_gordan(S(2), S(1), S(3), S(tm), S(q), S(tmp)))
        a.append(m)
    zg = 2 * math.pi * 1.4 * 3 * 0.5
    ze = 2 * math.pi * 1.4 * 3 * 2.0 / 3
    th = 50 * math.pi / 180
    h = np.zeros((d, d), dtype=complex)
    for i in range(ng):
        h[i, i] = zg * (i - 2)
    for j in range(ne):
        h[ng + j, ng + j] = ze * (j - 3) - GAMMA / 2
    c = [math.sin(th) / math.sqrt(2), math.cos(th), -math.sin(th) / math.sqrt(2)]
    up = sum(ck * ak.conj().T for ck, ak in zip(c, a))
    h = h + GAMMA / 2 * (up + up.conj().T)
    psi0 = np.zeros(d, dtype=complex)
    psi0[0] = 1
    return h, [math.sqrt(GAMMA) * ak for ak in a], psi0, 20.0


def trajectory(h, cs, psi0, t_end, rng, tol=1e-7):
    heff = h - 0.5j * sum(c.conj().T @ c for c in cs)
    lam, v = np.linalg.eig(heff)
    vinv = np.linalg.inv(v)
    scale = np.max(np.abs(lam))
    psi = psi0.copy()
    t = 0.0
    jumps = 0
    r = 1.0 - rng.random()
    while t < t_end:
        coef = vinv @ psi
        total = t_end - t

        def g(tau):
            return np.linalg.norm(v @ (coef * np.exp(-1j * lam * tau))) ** 2 - r

        if g(total) > 0:
            break
        a, b = 0.0, min(total, 1.0 / scale)
        while g(b) > 0:
            a, b = b, min(total, 2 * b)
        tau = scipy.optimize.brentq(g, a, b, xtol=tol)
        psi = v @ (coef * np.exp(-1j * lam * tau))
        t += tau
        cpsi = [c @ psi for c in cs]
        w = np.array([np.vdot(x, x).real for x in cpsi])
        k = int(np.searchsorted(np.cumsum(w), (1.0 - rng.random()) * w.sum()))
        k = min(k, len(cs) - 1)
        psi = cpsi[k] / math.sqrt(w[k])
        jumps += 1
        r = 1.0 - rng.random()
    return jumps


def measure(problem, seconds):
    h, cs, psi0, t_end = problem
    rng = np.random.default_rng(1)
    jumps = 0
    start = time.process_time()
    while time.process_time() - start < seconds:
        jumps += trajectory(h, cs, psi0, t_end, rng)
    return jumps / (time.process_time() - start)


def main():
    seconds = float(sys.argv[1]) if len(sys.argv) > 1 else 3.0
    out = {"implementation": "numpy/scipy (bench/scipy_waiting_time.py)",
           "two_level_jumps_per_s": measure(two_level(), seconds),
           "rb87_twelve_level_jumps_per_s": measure(rb_atom(), seconds)}
    print(json.dumps(out, indent=2))


if __name__ == "__main__":
    main()
