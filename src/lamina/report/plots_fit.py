"""Plots of a fit (matplotlib, Agg backend): spectra with residuals, fitted n and k.

For every dataset: one column per measured quantity, data as markers and model
as lines against wavelength, one colour per angle of incidence, residuals
(model - data) in a smaller panel below.  For every fitted material: n and k
against wavelength over the range of the data.  Files are written atomically.
"""
from __future__ import annotations

import re
from pathlib import Path

import numpy as np

LABELS = {"psi": "Psi (deg)", "delta": "Delta (deg)", "R": "R", "T": "T"}


def _pyplot():
    import matplotlib
    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt
    return plt


def _save(fig, path: Path) -> Path:
    from ..data.writers import atomic_path
    with atomic_path(path) as tmp:
        fig.savefig(tmp, dpi=110, format="png")
    return path


def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_-]+", "_", Path(text).stem if text else "data").strip("_") or "data"


def spectra_figure(points, model_ds, title: str):
    """Figure: per quantity a data/model panel and a residual panel."""
    plt = _pyplot()
    quantities = [q for q in ("psi", "delta", "R", "T") if q in set(points["quantity"])]
    fig, axes = plt.subplots(2, len(quantities), figsize=(4.6 * len(quantities), 5.6), squeeze=False,
                             sharex="col", gridspec_kw={"height_ratios": [3, 1.2]})
    angles = np.unique(points["angle_deg"].to_numpy())
    colours = plt.get_cmap("viridis")(np.linspace(0.0, 0.85, max(len(angles), 1)))
    for col, q in enumerate(quantities):
        top, bottom = axes[0, col], axes[1, col]
        sel = points[points["quantity"] == q]
        for colour, angle in zip(colours, angles):
            pts = sel[sel["angle_deg"] == angle]
            if pts.empty:
                continue
            top.plot(pts["wavelength_nm"], pts["data"], "o", ms=2.5, mfc="none", color=colour,
                     label=f"{angle:g} deg data")
            if q in model_ds.data_vars and angle in model_ds["angle"].values:
                line = np.asarray(model_ds[q].sel(angle=angle).values, dtype=float)
                if q == "delta":
                    line = _break_wraps(line)
                top.plot(model_ds["wavelength"], line, "-", lw=1.2, color=colour, label=f"{angle:g} deg model")
            bottom.plot(pts["wavelength_nm"], pts["residual"], ".", ms=2.5, color=colour)
        bottom.axhline(0.0, color="0.5", lw=0.8)
        top.set_ylabel(LABELS[q])
        bottom.set_ylabel("model - data")
        bottom.set_xlabel("wavelength (nm)")
        top.grid(alpha=0.3)
        bottom.grid(alpha=0.3)
    axes[0, 0].legend(fontsize=7, ncol=2, frameon=False)
    fig.suptitle(title, fontsize=10)
    fig.tight_layout()
    return fig


def _break_wraps(delta_deg: np.ndarray) -> np.ndarray:
    """NaN where Delta jumps across 0/360, so a line does not cross the whole panel."""
    out = delta_deg.copy()
    jumps = np.nonzero(np.abs(np.diff(delta_deg)) > 180.0)[0]
    out[jumps + 1] = np.nan
    return out


def nk_figure(materials: dict):
    """n and k of every fitted material against wavelength."""
    plt = _pyplot()
    fig, (ax_n, ax_k) = plt.subplots(1, 2, figsize=(9.5, 3.8))
    for label, (material, wavelength_nm) in materials.items():
        if material is None:
            continue
        wl = np.linspace(float(np.min(wavelength_nm)), float(np.max(wavelength_nm)), 300)
        nk = material.nk(wl)
        ax_n.plot(wl, nk.real, label=label)
        ax_k.plot(wl, nk.imag, label=label)
    ax_n.set_ylabel("n")
    ax_k.set_ylabel("k")
    for ax in (ax_n, ax_k):
        ax.set_xlabel("wavelength (nm)")
        ax.grid(alpha=0.3)
    ax_n.legend(fontsize=8, frameon=False)
    fig.suptitle("fitted optical constants", fontsize=10)
    fig.tight_layout()
    return fig


def write_fit_plots(result, outdir) -> list[Path]:
    """spectra_<n>_<source>.png for every dataset and nk.png when optical constants were fitted."""
    plt = _pyplot()
    outdir = Path(outdir)
    model_sets = result.model_dataset if isinstance(result.model_dataset, list) else [result.model_dataset]
    sizes = result.points.attrs.get("block_sizes", [len(result.points)])
    written, start = [], 0
    for k, (model_ds, size) in enumerate(zip(model_sets, sizes), start=1):
        points = result.points.iloc[start:start + size]
        start += size
        source = str(model_ds.attrs.get("source_file", ""))
        sample = str(model_ds.attrs.get("sample", ""))
        name = Path(source).name if source else ""
        title = f"{sample}: {name}" if sample and name and sample != Path(source).stem else (name or sample)
        fig = spectra_figure(points, model_ds, title)
        written.append(_save(fig, outdir / f"spectra_{k}_{_slug(source or sample)}.png"))
        plt.close(fig)
    if result.materials:
        fig = nk_figure(result.materials)
        written.append(_save(fig, outdir / "nk.png"))
        plt.close(fig)
    return written


def write_nk_plot(inversion, path) -> Path:
    """n and k of a point-by-point inversion with 1-sigma bars and the oscillator-sum check."""
    plt = _pyplot()
    from ..fit.invert import oscillator_sum
    from ..units import HC_EV_NM
    wl = inversion.wavelength_nm
    fig, (ax_n, ax_k) = plt.subplots(1, 2, figsize=(9.5, 3.8))
    ax_n.errorbar(wl, inversion.n, yerr=np.nan_to_num(inversion.n_err, posinf=0.0), fmt="o", ms=2.5, mfc="none",
                  lw=0.8, label="point by point")
    ax_k.errorbar(wl, inversion.k, yerr=np.nan_to_num(inversion.k_err, posinf=0.0), fmt="o", ms=2.5, mfc="none",
                  lw=0.8, label="point by point")
    kk = inversion.kk
    if kk.get("oscillators"):
        dense = np.linspace(wl.min(), wl.max(), 400)
        osc = kk["oscillators"]
        eps = oscillator_sum(HC_EV_NM / dense, kk["eps_inf"], np.array([o["amplitude"] for o in osc]),
                             np.array([o["center_ev"] for o in osc]), np.array([o["broadening_ev"] for o in osc]))
        N = np.sqrt(eps)
        ax_n.plot(dense, N.real, "-", lw=1.2, label="oscillator sum (KK check)")
        ax_k.plot(dense, N.imag, "-", lw=1.2, label="oscillator sum (KK check)")
    ax_n.set_ylabel("n")
    ax_k.set_ylabel("k")
    for ax in (ax_n, ax_k):
        ax.set_xlabel("wavelength (nm)")
        ax.grid(alpha=0.3)
    ax_n.legend(fontsize=8, frameon=False)
    fig.suptitle(f"layer '{inversion.layer}': n, k by inversion", fontsize=10)
    fig.tight_layout()
    _save(fig, Path(path))
    plt.close(fig)
    return Path(path)
