"""Figures of docs/study-atom-number.md from the points.csv of tools/study-atom-number.sh.

Usage: /usr/bin/python3 tools/study-atom-number-plot.py POINTS.csv FIGDIR [STATIONARY.csv]
Beat contrast = amplitude / level of the fitted heralded g2 (damped cosine on a flat level),
with its error propagated from the fit's standard errors (independent errors assumed).
"""
import csv
import sys

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

f = lambda r, k: float(r[k])
# The Zeeman beat of the scenario: 2 |g_F| μB B / h for 87Rb F = 1 (g_F = −0.5018267, REFERENCES.md
# [derived] from Steck's 87Rb D line data; μB/h = 1.39962449361 MHz/G, CODATA 2018) at B = 2 G.
BEAT_MHZ = 2 * 0.5018267 * 1.39962449361 * 2.0
# A point counts as resolved when the fitted beat amplitude exceeds 3 standard errors (the
# significance `flyby analyze` asks of a model term by default) and the fitted frequency is
# within 20 % of the Zeeman beat (otherwise the fit has taken the transit envelope for a slow
# "beat", as it does when the transit is shorter than a few beat periods). Others are left out of
# the figures and listed.
rows = []
for r in csv.DictReader(open(sys.argv[1])):
    if (not r["amplitude"] or not 3 * abs(f(r, "amplitude_err")) < abs(f(r, "amplitude"))
            or abs(f(r, "freq_MHz") / BEAT_MHZ - 1) > 0.2):
        print("unresolved beat, left out:", r["transit_us"], "us,", r["mean_atoms_count"], "atoms")
        continue
    rows.append(r)
figdir = sys.argv[2]
transits = sorted({f(r, "transit_us") for r in rows})
atoms = sorted({f(r, "mean_atoms_count") for r in rows})

fig, ax = plt.subplots(figsize=(5, 3.6), dpi=100)
for T in transits:
    sel = sorted([r for r in rows if f(r, "transit_us") == T], key=lambda r: f(r, "mean_atoms_count"))
    n = np.array([f(r, "mean_atoms_count") for r in sel])
    c = np.array([f(r, "amplitude") / f(r, "level") for r in sel])
    e = np.abs(c) * np.hypot([f(r, "amplitude_err") / f(r, "amplitude") for r in sel],
                             [f(r, "level_err") / f(r, "level") for r in sel])
    ax.errorbar(n, c, yerr=e, marker="o", capsize=3, label=f"transit {T:g} µs")
# Independent Poisson emitters (Kimble, Dagenais & Mandel, Phys. Rev. A 18, 201 (1978)): the
# beat and the flat level above 1 both scale as 1/N_eff, N_eff ∝ N, so contrast = a / (N + b).
# Weighted least squares (SciPy) over the points with transit ≥ 2.5 µs.
from scipy.optimize import curve_fit  # noqa: E402
law = lambda n, a, b: a / (n + b)
sel = [r for r in rows if f(r, "transit_us") >= 2.5]
n = np.array([f(r, "mean_atoms_count") for r in sel])
c = np.array([f(r, "amplitude") / f(r, "level") for r in sel])
e = np.abs(c) * np.hypot([f(r, "amplitude_err") / f(r, "amplitude") for r in sel],
                         [f(r, "level_err") / f(r, "level") for r in sel])
(a, b), cov = curve_fit(law, n, c, p0=(1, 1), sigma=e, absolute_sigma=True)
chi2 = float(np.sum(((c - law(n, a, b)) / e) ** 2))
print(f"contrast = a/(N + b): a = {a:.3f} ± {np.sqrt(cov[0, 0]):.3f}, b = {b:.3f} ± {np.sqrt(cov[1, 1]):.3f},"
      f" chi2 = {chi2:.1f} for {len(n) - 2} degrees of freedom")
nn = np.geomspace(min(atoms), max(atoms), 50)
ax.plot(nn, law(nn, a, b), "k--", lw=1, label=f"a/(N + b), a = {a:.2f}, b = {b:.2f}")
ax.legend(frameon=False)
ax.set_xscale("log")
ax.set_xlabel("mean atoms in the drive, N")
ax.set_ylabel("heralded beat contrast")
ax.legend(frameon=False)
ax.grid(alpha=0.3)
fig.tight_layout()
fig.savefig(f"{figdir}/study-atom-number-contrast.png")

fig, ax = plt.subplots(figsize=(5, 3.6), dpi=100)
for N in atoms:
    sel = sorted([r for r in rows if f(r, "mean_atoms_count") == N], key=lambda r: f(r, "transit_us"))
    T = np.array([f(r, "transit_us") for r in sel])
    d = np.array([f(r, "decay_us") for r in sel])
    e = np.array([f(r, "decay_err") for r in sel])
    ax.errorbar(T, d, yerr=e, marker="s", capsize=3, label=f"N = {N:g}")
# The same atom held at the drive centre (no transit): its fitted decay as a band.
if len(sys.argv) > 3:
    st = next(csv.DictReader(open(sys.argv[3])))
    if st["decay_us"]:
        d0, e0 = f(st, "decay_us"), f(st, "decay_err")
        ax.axhspan(d0 - e0, d0 + e0, color="0.85", zorder=0)
        ax.axhline(d0, color="0.4", lw=1, ls="--", label="atom at rest at the drive centre")
ax.set_xscale("log")
ax.set_xlabel("transit time w/v (µs)")
ax.set_ylabel("beat decay time (µs)")
ax.legend(frameon=False)
ax.grid(alpha=0.3)
fig.tight_layout()
fig.savefig(f"{figdir}/study-atom-number-decay.png")
print("wrote", f"{figdir}/study-atom-number-contrast.png", f"{figdir}/study-atom-number-decay.png")
