#!/usr/bin/python3
"""Figure of singles rates per time slice (drift check), one series per channel with Poisson errors.

Reads singles.csv written by `flyby analyze` (comment lines start with '#', then the header
slice_mid_s,<ch>_counts,<ch>_rate_per_s,<ch>_rate_err_per_s,...). Plotting only: every number comes from
flyby's C++ analysis.
Usage: plot_singles.py SINGLES.csv --out FIGURE --format png
"""
import argparse

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("csv")
    ap.add_argument("--out", required=True)
    ap.add_argument("--format", default="png")
    a = ap.parse_args()
    header, rows = None, []
    with open(a.csv, encoding="utf-8") as f:
        for line in f:
            if line.startswith("#"):
                continue
            if header is None:
                header = line.strip().split(",")
                continue
            rows.append([float(x) for x in line.strip().split(",")])
    data = np.array(rows)
    t = data[:, 0]
    fig, ax = plt.subplots(figsize=(7.0, 3.8), constrained_layout=True)
    for k in range(1, len(header), 3):
        name = header[k][: -len("_counts")]
        rate, err = data[:, k + 1], data[:, k + 2]
        ax.errorbar(t * 1e3, rate, yerr=err, fmt="o-", ms=3, lw=0.8, capsize=2, label=name)
        mean = rate.mean()
        ax.axhline(mean, lw=0.6, ls="--", color=ax.lines[-1].get_color())
    ax.set_xlabel("record time (ms)")
    ax.set_ylabel("singles rate (1/s)")
    ax.set_title("singles per time slice (dashed: mean)", fontsize=10)
    ax.grid(alpha=0.25)
    ax.legend(fontsize=8)
    fig.savefig(a.out, format=a.format, dpi=150)


if __name__ == "__main__":
    main()
