#!/usr/bin/python3
"""Figure of a flyby correlation histogram: g2(tau) with Poisson error bars.

Reads the CSV written by `flyby correlate` (comment lines start with '#', then the header
tau_ns,counts,g2,g2_err). Plotting only: every number comes from flyby's C++ analysis.
Usage: plot_g2.py G2.csv --out FIGURE --format png [--title TEXT]
"""
import argparse

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402


def read_csv(path):
    meta, rows, header = {}, [], None
    with open(path, encoding="utf-8") as f:
        for line in f:
            line = line.rstrip("\n")
            if line.startswith("#"):
                body = line[1:].strip()
                if ":" in body:
                    k, v = body.split(":", 1)
                    meta[k.strip()] = v.strip()
                continue
            if header is None:
                header = line.split(",")
                continue
            if line:
                rows.append([float(x) for x in line.split(",")])
    data = np.array(rows)
    return meta, {name: data[:, i] for i, name in enumerate(header)}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("csv")
    ap.add_argument("--out", required=True)
    ap.add_argument("--format", default="png")
    ap.add_argument("--title", default=None)
    a = ap.parse_args()
    meta, d = read_csv(a.csv)
    fig, ax = plt.subplots(figsize=(7.0, 4.2), constrained_layout=True)
    ax.errorbar(d["tau_ns"], d["g2"], yerr=d["g2_err"], fmt="o", ms=2.5, lw=0.8, elinewidth=0.7,
                color="#1f4e79", ecolor="#7f9fbf", label="data (Poisson errors)")
    ax.axhline(1.0, color="0.5", lw=0.8, ls="--")
    ax.set_xlabel(r"delay $\tau$ (ns)")
    ax.set_ylabel(r"$g^{(2)}(\tau)$")
    title = a.title or "g2: start {} / stop {}".format(meta.get("start_channel", "?"), meta.get("stop_channel", "?"))
    ax.set_title(title, fontsize=10)
    info = []
    for k in ("n_start", "n_stop", "duration_s", "expected_counts_per_bin"):
        if k in meta:
            info.append("{} = {}".format(k, meta[k]))
    if info:
        ax.text(0.99, 0.98, "\n".join(info), transform=ax.transAxes, ha="right", va="top", fontsize=7,
                color="0.3", family="monospace", multialignment="left")
    ax.grid(alpha=0.25)
    ax.legend(loc="upper left", fontsize=8)
    fig.savefig(a.out, format=a.format, dpi=150)


if __name__ == "__main__":
    main()
