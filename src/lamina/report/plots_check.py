"""Plots of `lamina check` (PNG, matplotlib Agg).

- ``check_<quantity>_<pol>_<angle>deg.png``: one panel per quantity, polarization
  and angle: the allowed region of every band shaded, the design curve, the
  Monte Carlo 5-95 % envelope, the measured curve and the curve of the drift fit;
- ``check_sensitivity.png``: each layer's criticality (see qa/sensitivity.py).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

UNITS = {"R": "", "T": "", "A": "", "psi": " (deg)", "delta": " (deg)"}


def _figure():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _shade_band(ax, band, ylim) -> None:
    lo, hi = band.wavelength_nm
    bottom = band.min if band.min is not None else ylim[0]
    top = band.max if band.max is not None else ylim[1]
    ax.fill_between([lo, hi], [bottom, bottom], [top, top], color="#9fd39f", alpha=0.35, lw=0,
                    label="allowed region")
    ax.annotate(band.name, xy=(lo, top), xytext=(2, 1), textcoords="offset points", ha="left", va="bottom",
                fontsize=7, color="#2d6a2d")


def _y_limits(panel) -> tuple[float, float]:
    series = [panel["design"]]
    if panel["envelope"] is not None:
        series += [panel["envelope"][0], panel["envelope"][1]]
    if panel["measured"] is not None:
        wl = panel["wavelength_nm"]
        inside = (panel["measured"][0] >= wl[0]) & (panel["measured"][0] <= wl[-1])
        series.append(panel["measured"][1][inside])
    for band in panel["bands"]:
        series += [np.array([v]) for v in (band.min, band.max) if v is not None]
    values = np.concatenate([np.ravel(s) for s in series])
    values = values[np.isfinite(values)]
    lo, hi = float(values.min()), float(values.max())
    pad = 0.08 * (hi - lo) if hi > lo else 0.01
    return lo - pad, hi + pad


def plot_panel(panel, path: Path) -> None:
    from ..data.writers import atomic_path

    plt = _figure()
    fig, ax = plt.subplots(figsize=(7.5, 4.2), dpi=110)
    ylim = _y_limits(panel)
    for band in panel["bands"]:
        _shade_band(ax, band, ylim)
    wl = panel["wavelength_nm"]
    if panel["envelope"] is not None:
        ax.fill_between(wl, panel["envelope"][0], panel["envelope"][1], color="#7a8fd6", alpha=0.35, lw=0,
                        label="Monte Carlo 5-95 %")
    ax.plot(wl, panel["design"], color="#1b2a6b", lw=1.6, label="design")
    if panel["measured"] is not None:
        ax.plot(panel["measured"][0], panel["measured"][1], ".", color="#c0392b", ms=2.5, label="measured")
    if panel["fitted"] is not None:
        ax.plot(wl, panel["fitted"], "--", color="#e67e22", lw=1.2, label="drift fit")
    ax.set_ylim(*ylim)
    ax.set_xlim(wl[0], wl[-1])
    ax.set_xlabel("wavelength (nm)")
    pol = "" if panel["quantity"] in ("psi", "delta") else f", {panel['polarization']}"
    ax.set_ylabel(panel["quantity"] + UNITS[panel["quantity"]])
    ax.set_title(f"{panel['quantity']} at {panel['angle_deg']:g} deg{pol}", fontsize=10)
    handles, labels = ax.get_legend_handles_labels()
    unique = dict(zip(labels, handles))
    ax.legend(unique.values(), unique.keys(), fontsize=8, loc="best")
    ax.grid(alpha=0.3)
    fig.tight_layout()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png")
    plt.close(fig)


def plot_sensitivity(sensitivity: dict, path: Path) -> None:
    from ..data.writers import atomic_path

    plt = _figure()
    names = list(sensitivity["layers"])
    values = [sensitivity["layers"][n]["criticality"] for n in names]
    fig, ax = plt.subplots(figsize=(6.0, 0.45 * len(names) + 1.4), dpi=110)
    ax.barh(names[::-1], values[::-1], color="#1b2a6b")
    ax.set_xlabel("criticality (fraction of the allowed region swept by one tolerance)")
    ax.set_title("layer thickness sensitivity", fontsize=10)
    ax.grid(alpha=0.3, axis="x")
    fig.tight_layout()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png")
    plt.close(fig)


def plot_check(plot_data: dict, outdir) -> list[Path]:
    """Write every plot of a check into `outdir`; returns the paths."""
    outdir = Path(outdir)
    paths = []
    for panel in plot_data["panels"]:
        angle = f"{panel['angle_deg']:g}".replace(".", "p")
        path = outdir / f"check_{panel['quantity']}_{panel['polarization']}_{angle}deg.png"
        plot_panel(panel, path)
        paths.append(path)
    if plot_data.get("sensitivity", {}).get("layers"):
        path = outdir / "check_sensitivity.png"
        plot_sensitivity(plot_data["sensitivity"], path)
        paths.append(path)
    return paths
