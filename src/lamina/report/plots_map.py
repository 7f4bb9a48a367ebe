"""Wafer-map plots: filled contour map, histogram, radial profile, per-wafer trend.

Every figure uses matplotlib's Agg canvas (no display needed) and is written
atomically, or returned as PNG bytes when the path is None (`render`).  Coordinates are mm with equal aspect; the wafer outline has its
notch at the bottom; the edge-exclusion ring is dashed; sites outside it are
drawn hollow because statistics and limits ignore them.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..data.writers import atomic_path
from ..qa.wafer import WaferGeometry

#: our palette: a perceptually uniform map for values, plain greys for furniture
VALUE_CMAP = "cividis"
INK = "#222222"
FAINT = "#8a8a8a"
FAIL_COLOUR = "#c0392b"
LIMIT_COLOUR = "#b03a2e"
#: label values on the map only when this few sites are drawn (else they overlap)
MAX_LABELLED_SITES = 80


def _figure(width=6.0, height=5.2):
    from matplotlib.figure import Figure
    fig = Figure(figsize=(width, height), dpi=110)
    return fig, fig.add_subplot(1, 1, 1)


def _save(fig, path):
    """Write the PNG to `path` (atomically) and return the path; with path None return the PNG bytes."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    FigureCanvasAgg(fig)
    if path is None:
        import io
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png")
        return buffer.getvalue()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png")
    return Path(path)


def render(kind: str, *args, **kwargs) -> bytes:
    """PNG bytes of one plot (`kind` names a plot function: wafer_map, histogram, radial_profile, trend).

    The plots are independent of each other and need no file system: `lamina map` draws them
    as tasks on its dask workers, which are idle once the sites are fitted, and writes the bytes.
    """
    plots = {"wafer_map": wafer_map, "histogram": histogram, "radial_profile": radial_profile, "trend": trend}
    return plots[kind](None, *args, **kwargs)


def _label(name: str, unit: str) -> str:
    return f"{name} [{unit}]" if unit else name


def _interpolate(x_mm, y_mm, values, geometry: WaferGeometry, points: int = 121):
    """Values on a square grid over the wafer, masked outside it.

    A thin-plate spline through the sites (scipy RBFInterpolator; local, with the
    nearest 64 sites, on maps of over 1500 sites) gives a smooth surface that also reaches the
    wafer edge beyond the outermost sites; with fewer than 3 sites, or sites on one
    line, each point takes its nearest site's value.
    """
    from scipy.interpolate import NearestNDInterpolator, RBFInterpolator
    radius = geometry.radius_mm
    axis = np.linspace(-radius, radius, points)
    grid_x, grid_y = np.meshgrid(axis, axis)
    sites = np.column_stack([x_mm, y_mm])
    # evaluate only on the wafer (a little beyond its edge, so contours reach the outline)
    inside = np.hypot(grid_x, grid_y) <= radius * 1.02
    targets = np.column_stack([grid_x[inside], grid_y[inside]])
    surface = None
    if len(values) >= 3:
        try:
            spline = RBFInterpolator(sites, values, kernel="thin_plate_spline",
                                     neighbors=64 if len(values) > 1500 else None)
            surface = spline(targets)
        except (np.linalg.LinAlgError, ValueError):  # collinear or repeated sites
            surface = None
    if surface is None:
        surface = NearestNDInterpolator(sites, values)(targets)
    grid = np.full(grid_x.shape, np.nan)
    grid[inside] = surface
    return grid_x, grid_y, np.ma.masked_invalid(grid)


def wafer_map(path, results, name: str, geometry: WaferGeometry, unit: str = "", title: str = "",
              limits: tuple[float, float] | None = None) -> Path | bytes:
    """Filled contour of parameter `name` over the wafer with the sites marked and labelled."""
    fig, ax = _figure()
    x_mm = results["x_mm"].values
    y_mm = results["y_mm"].values
    values = results[name].values
    fitted = np.isfinite(values)
    in_zone = results["in_zone"].values == 1
    outline_x, outline_y = geometry.outline()
    if fitted.sum() >= 1:
        gx, gy, gz = _interpolate(x_mm[fitted], y_mm[fitted], values[fitted], geometry)
        low, high = float(np.nanmin(values[fitted])), float(np.nanmax(values[fitted]))
        if high - low < 1e-12 * max(1.0, abs(high)):
            low, high = low - 0.5, high + 0.5  # a flat map still needs a colour scale
        levels = np.linspace(low, high, 15)
        filled = ax.contourf(gx, gy, gz, levels=levels, cmap=VALUE_CMAP, extend="both")
        from matplotlib.patches import Polygon
        clip = Polygon(np.column_stack([outline_x, outline_y]), closed=True, transform=ax.transData)
        filled.set_clip_path(clip)
        bar = fig.colorbar(filled, ax=ax, shrink=0.85, format=f"%.{_digits(values[fitted])}f")
        bar.set_label(_label(name, unit))
        if limits is not None:
            for bound in limits:
                if math.isfinite(bound) and low <= bound <= high:
                    bar.ax.axhline(bound, color=LIMIT_COLOUR, linewidth=1.5)
    ax.plot(outline_x, outline_y, color=INK, linewidth=1.2)
    if geometry.edge_exclusion_mm > 0:
        theta = np.linspace(0, 2 * math.pi, 361)
        ax.plot(geometry.zone_radius_mm * np.cos(theta), geometry.zone_radius_mm * np.sin(theta),
                color=INK, linewidth=0.9, linestyle=(0, (5, 4)))
    _mark_sites(ax, x_mm, y_mm, values, fitted, in_zone, results)
    _mm_axes(ax, geometry)
    ax.set_title(title or name, fontsize=10)
    return _save(fig, path)


def _mark_sites(ax, x_mm, y_mm, values, fitted, in_zone, results) -> None:
    passed = results["pass"].values
    solid = fitted & in_zone
    ax.scatter(x_mm[solid], y_mm[solid], s=14, facecolor="white", edgecolor=INK, linewidth=0.7, zorder=3)
    hollow = fitted & ~in_zone
    ax.scatter(x_mm[hollow], y_mm[hollow], s=14, facecolor="none", edgecolor=FAINT, linewidth=0.7, zorder=3)
    failing = passed == 0
    if failing.any():
        ax.scatter(x_mm[failing], y_mm[failing], s=40, facecolor="none", edgecolor=FAIL_COLOUR, linewidth=1.2,
                   zorder=4)
    broken = ~fitted
    if broken.any():
        ax.scatter(x_mm[broken], y_mm[broken], s=30, marker="x", color=FAIL_COLOUR, linewidth=1.2, zorder=4)
    if len(values) <= MAX_LABELLED_SITES:
        digits = _digits(values[fitted])
        for x, y, value, ok in zip(x_mm, y_mm, values, fitted):
            text = f"{value:.{digits}f}" if ok else "failed"
            ax.annotate(text, (x, y), xytext=(0, 5), textcoords="offset points", ha="center", va="bottom",
                        fontsize=6, color=INK if ok else FAIL_COLOUR, zorder=5,
                        bbox={"boxstyle": "round,pad=0.12", "facecolor": "white", "edgecolor": "none",
                              "alpha": 0.7})


def _digits(values) -> int:
    """Decimals that show differences between sites without noise digits."""
    if values.size < 2:
        return 2
    spread = float(np.nanmax(values) - np.nanmin(values))
    if spread <= 0:
        return 2
    return int(min(4, max(0, 2 - math.floor(math.log10(spread)))))


def _mm_axes(ax, geometry: WaferGeometry) -> None:
    reach = geometry.radius_mm * 1.06
    ax.set_xlim(-reach, reach)
    ax.set_ylim(-reach, reach)
    ax.set_aspect("equal")
    ax.set_xlabel("x [mm]")
    ax.set_ylabel("y [mm]")
    ax.grid(True, color="#e4e4e4", linewidth=0.5)
    ax.set_axisbelow(True)


def histogram(path, results, name: str, unit: str = "", limits: tuple[float, float] | None = None,
              title: str = "") -> Path | bytes:
    """Histogram of a parameter over the fitted sites inside the edge exclusion, limits as lines."""
    fig, ax = _figure(6.0, 4.0)
    use = np.isfinite(results[name].values) & (results["in_zone"].values == 1)
    values = results[name].values[use]
    if values.size:
        bins = int(min(30, max(5, math.ceil(math.sqrt(values.size)) + 2)))
        ax.hist(values, bins=bins, color="#5b7fa3", edgecolor="white", linewidth=0.6)
    if limits is not None:
        for bound in limits:
            if math.isfinite(bound):
                ax.axvline(bound, color=LIMIT_COLOUR, linewidth=1.4, linestyle=(0, (4, 3)))
    ax.set_xlabel(_label(name, unit))
    ax.set_ylabel("sites inside the edge exclusion")
    ax.set_title(title or f"{name}: {values.size} sites", fontsize=10)
    ax.grid(True, axis="y", color="#e4e4e4", linewidth=0.5)
    ax.set_axisbelow(True)
    return _save(fig, path)


def radial_profile(path, results, name: str, geometry: WaferGeometry, unit: str = "",
                   limits: tuple[float, float] | None = None, title: str = "") -> Path | bytes:
    """Value against distance from the centre, one marker style per wafer; exclusion shaded."""
    fig, ax = _figure(6.0, 4.0)
    radius = results["radius_mm"].values
    values = results[name].values
    wafers = results["wafer"].values
    names = list(dict.fromkeys(wafers.tolist()))
    for k, wafer in enumerate(names):
        use = (wafers == wafer) & np.isfinite(values)
        ax.plot(radius[use], values[use], linestyle="none", marker="o", markersize=3.5,
                markerfacecolor="none" if k % 2 else None, label=f"wafer {wafer}" if len(names) > 1 else None)
    if geometry.edge_exclusion_mm > 0:
        ax.axvspan(geometry.zone_radius_mm, geometry.radius_mm, color="#eeeeee", zorder=0,
                   label="edge exclusion")
    if limits is not None:
        for bound in limits:
            if math.isfinite(bound):
                ax.axhline(bound, color=LIMIT_COLOUR, linewidth=1.2, linestyle=(0, (4, 3)))
    ax.set_xlim(0, geometry.radius_mm)
    ax.set_xlabel("distance from centre [mm]")
    ax.set_ylabel(_label(name, unit))
    ax.set_title(title or f"{name}: radial profile", fontsize=10)
    ax.grid(True, color="#e4e4e4", linewidth=0.5)
    if len(names) > 1 or geometry.edge_exclusion_mm > 0:
        ax.legend(fontsize=7, frameon=False)
    return _save(fig, path)


def trend(path, summary: dict, name: str, unit: str = "",
          limits: tuple[float, float] | None = None) -> Path | bytes:
    """Mean of a parameter per wafer (file order) with bars from min to max."""
    fig, ax = _figure(max(5.0, 0.5 * len(summary["wafers"]) + 3), 4.0)
    labels = list(summary["wafers"])
    stats = [summary["wafers"][w]["parameters"][name] for w in labels]
    mean = np.array([s["mean"] for s in stats], dtype=float)
    low = np.array([s["min"] for s in stats], dtype=float)
    high = np.array([s["max"] for s in stats], dtype=float)
    position = np.arange(len(labels))
    ax.errorbar(position, mean, yerr=[mean - low, high - mean], fmt="o", color=INK, ecolor="#5b7fa3",
                elinewidth=2, capsize=4)
    for k, wafer in enumerate(labels):
        if summary["wafers"][wafer]["pass"] is False:
            ax.plot(position[k], mean[k], marker="o", markersize=10, markerfacecolor="none",
                    markeredgecolor=FAIL_COLOUR)
    if limits is not None:
        for bound in limits:
            if math.isfinite(bound):
                ax.axhline(bound, color=LIMIT_COLOUR, linewidth=1.2, linestyle=(0, (4, 3)))
    ax.set_xticks(position)
    ax.set_xlim(-0.6, len(labels) - 0.4)
    ax.set_xticklabels(labels, rotation=45 if len(labels) > 8 else 0, fontsize=8)
    ax.set_xlabel("wafer")
    ax.set_ylabel(_label(name, unit))
    ax.set_title(f"{name}: mean and range (min..max) per wafer", fontsize=10)
    ax.grid(True, axis="y", color="#e4e4e4", linewidth=0.5)
    return _save(fig, path)
