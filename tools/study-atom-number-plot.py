"""Figures of docs/study-atom-number.md from the points.csv of tools/study-atom-number.sh.

Usage: /usr/bin/python3 tools/study-atom-number-plot.py POINTS.csv FIGDIR
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
# Points whose fitted beat amplitude is not resolved (standard error ≥ value: the fit did not
# find the beat) are left out of the figures and listed.
rows = []
for r in csv.DictReader(open(sys.argv[1])):
    if not abs(f(r, "amplitude_err")) < abs(f(r, "amplitude")):
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
ax.set_xlabel("transit time w/v (µs)")
ax.set_ylabel("beat decay time (µs)")
ax.legend(frameon=False)
ax.grid(alpha=0.3)
fig.tight_layout()
fig.savefig(f"{figdir}/study-atom-number-decay.png")
print("wrote", f"{figdir}/study-atom-number-contrast.png", f"{figdir}/study-atom-number-decay.png")
