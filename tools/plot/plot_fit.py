#!/usr/bin/python3
"""Figure of a flyby g2 fit: data with error bars, the fitted model, normalized residuals.

Reads the JSON written by `flyby fit` (fields "data" with tau_ns, g2, g2_err, model_g2 and
"parameters"). Plotting only: every number comes from flyby's C++ analysis.
Usage: plot_fit.py FIT.json --out FIGURE --format png
"""
import argparse
import json

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402


def fmt_value(v, e):
    """Value with its standard error, rounded to two significant digits of the error."""
    if v is None:
        return "n/a"
    if e is None or not (e > 0 and np.isfinite(e)):
        return "{:.6g}".format(v)
    if abs(v) > 1e6 or e > 1e6 or e > 1e3 * abs(v):  # unconstrained parameter: compact form
        return "{:.4g} ± {:.2g}".format(v, e)
    digits = max(0, 1 - int(np.floor(np.log10(e))))
    return "{:.{d}f} ± {:.{d}f}".format(v, e, d=digits)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("json")
    ap.add_argument("--out", required=True)
    ap.add_argument("--format", default="png")
    a = ap.parse_args()
    with open(a.json, encoding="utf-8") as f:
        fit = json.load(f)
    d = fit["data"]
    tau = np.array(d["tau_ns"])
    y, e, m = np.array(d["g2"]), np.array(d["g2_err"]), np.array(d["model_g2"])
    # Sparse histograms (few counts per bin) are shown merged over k adjacent bins, so that a
    # displayed point holds about 20 expected counts (at most 20 bins merged); the fit itself
    # used every bin. Counts per bin: E·g2 with E = g2/err² from the Poisson errors.
    ok = (e > 0) & (y > 0)
    E = np.median(y[ok] / e[ok] ** 2) if ok.any() else 0.0
    k = int(min(20, max(1, np.ceil(20.0 / (E * max(np.median(m), 1e-9)))))) if E > 0 else 1
    # Keep every beat resolved: a merged point spans at most 1/8 of the shortest beat period.
    freqs = [p["value"] for p in fit["parameters"] if p["name"].endswith("freq_MHz") and p["value"] > 0]
    width_ns = np.median(np.diff(np.sort(tau))) if len(tau) > 1 else 0.0
    if freqs and width_ns > 0:
        k = max(1, min(k, int(1e3 / (8 * max(freqs) * width_ns))))
    tau_full, m_full = tau.copy(), m.copy()
    rebinned = ""
    if k > 1:
        order = np.argsort(tau)
        tau, y, m = tau[order], y[order], m[order]
        n = len(tau) // k * k
        counts = (y[:n] * E).reshape(-1, k).sum(axis=1)
        tau = tau[:n].reshape(-1, k).mean(axis=1)
        m = m[:n].reshape(-1, k).mean(axis=1)
        y = counts / (k * E)
        e = np.sqrt(np.maximum(m * k * E, 1.0)) / (k * E)  # Poisson errors from the model
        rebinned = " (display: {} bins merged per point)".format(k)
    fig, (ax, ar) = plt.subplots(2, 1, figsize=(7.0, 5.6), sharex=True, constrained_layout=True,
                                 gridspec_kw={"height_ratios": [3, 1]})
    ax.errorbar(tau, y, yerr=e, fmt="o", ms=2.5, lw=0.8, elinewidth=0.7, color="#1f4e79",
                ecolor="#7f9fbf", label="data" + rebinned)
    order = np.argsort(tau_full)
    ax.plot(tau_full[order], m_full[order], color="#c0392b", lw=1.4, label="fit: " + fit["model"])
    ax.set_ylabel(r"$g^{(2)}(\tau)$")
    lines = []
    for p in fit["parameters"]:
        lines.append("{:<22s} {}".format(p["name"], fmt_value(p["value"], p["std_error"])))
    p_value = fit["p_value"] if fit["p_value"] is not None else float("nan")
    lines.append("chi2/dof = {:.1f}/{}   p = {:.3g}".format(fit["chi2"], fit["dof"], p_value))
    ax.text(0.985, 0.97, "\n".join(lines), transform=ax.transAxes, ha="right", va="top", fontsize=7,
            family="monospace", multialignment="left", bbox=dict(boxstyle="round,pad=0.5", fc="white", ec="0.8", alpha=0.85))
    ax.legend(loc="lower left", fontsize=8)
    ax.grid(alpha=0.25)
    ax.set_title("fit status: {}".format(fit["status"]), fontsize=10)
    ar.axhline(0, color="0.5", lw=0.8)
    ar.plot(tau, (y - m) / e, "o", ms=2, color="#1f4e79")
    ar.set_ylabel("(data−fit)/σ")
    ar.set_xlabel(r"delay $\tau$ (ns)")
    ar.grid(alpha=0.25)
    fig.savefig(a.out, format=a.format, dpi=150)


if __name__ == "__main__":
    main()
