"""Wafer geometry and map statistics.

Coordinates are in mm with the origin at the wafer centre, +x to the right and
+y away from the orientation notch (the notch sits at the bottom, -y).  A site
is *in the zone* when its distance from the centre is at most
``radius - edge_exclusion``; statistics and spec limits look only at those sites.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: wafer diameters in common production use (mm); used to guess the outline
#: when no spec file says it (common practice: SEMI standard wafer sizes).
STANDARD_DIAMETERS_MM = (50.8, 76.2, 100.0, 125.0, 150.0, 200.0, 300.0, 450.0)

#: notch depth and half width drawn on plots (mm; larger than a real notch so that it shows);
#: drawing only, not used in statistics
NOTCH_DEPTH_MM = 2.5
NOTCH_HALF_WIDTH_MM = 2.5


@dataclass(frozen=True)
class WaferGeometry:
    """A round wafer of `diameter_mm` with an edge band of `edge_exclusion_mm` left out."""

    diameter_mm: float = 150.0
    edge_exclusion_mm: float = 0.0

    @property
    def radius_mm(self) -> float:
        return self.diameter_mm / 2.0

    @property
    def zone_radius_mm(self) -> float:
        """Radius inside which sites count for statistics and spec limits."""
        return self.radius_mm - self.edge_exclusion_mm

    def radius_of(self, x_mm, y_mm) -> np.ndarray:
        return np.hypot(np.asarray(x_mm, dtype=float), np.asarray(y_mm, dtype=float))

    def in_zone(self, x_mm, y_mm) -> np.ndarray:
        """True for sites inside the edge exclusion (a tolerance of 1 um forgives rounding)."""
        return self.radius_of(x_mm, y_mm) <= self.zone_radius_mm + 1e-3

    def on_wafer(self, x_mm, y_mm) -> np.ndarray:
        return self.radius_of(x_mm, y_mm) <= self.radius_mm + 1e-3

    def outline(self, points: int = 721) -> tuple[np.ndarray, np.ndarray]:
        """x, y (mm) of the wafer edge: a circle with a small V notch at the bottom."""
        radius = self.radius_mm
        half_angle = math.asin(min(1.0, NOTCH_HALF_WIDTH_MM / radius))
        # start just right of the notch and walk counter-clockwise round to its left side
        start = -math.pi / 2 + half_angle
        theta = np.linspace(start, start + 2 * math.pi - 2 * half_angle, points)
        x = radius * np.cos(theta)
        y = radius * np.sin(theta)
        notch_x = np.array([0.0, x[0]])
        notch_y = np.array([-radius + NOTCH_DEPTH_MM, y[0]])
        return np.concatenate([x, notch_x]), np.concatenate([y, notch_y])


def guess_geometry(x_mm, y_mm) -> WaferGeometry:
    """The smallest standard wafer that holds every site, with no edge exclusion."""
    reach = float(np.nanmax(np.hypot(x_mm, y_mm))) if np.size(x_mm) else 0.0
    for diameter in STANDARD_DIAMETERS_MM:
        if reach <= diameter / 2.0 + 1e-3:
            return WaferGeometry(diameter, 0.0)
    return WaferGeometry(2.0 * math.ceil(reach), 0.0)


def reference_site(x_mm, y_mm, usable=None) -> int:
    """Index of the usable site nearest the centre (0, 0); first one on ties."""
    radius = np.hypot(np.asarray(x_mm, dtype=float), np.asarray(y_mm, dtype=float))
    if usable is not None:
        radius = np.where(np.asarray(usable, dtype=bool), radius, np.inf)
    if not np.isfinite(radius).any():
        raise ValueError("no usable site")
    return int(np.argmin(radius))


STAT_KEYS = ("mean", "std", "min", "max", "range", "nonuniformity_pct", "std_over_mean_pct", "n_sites")


def map_statistics(values) -> dict:
    """Summary numbers of one parameter over a set of sites (NaNs are left out).

    - std is the sample standard deviation (n - 1 in the denominator; 0 for one site)
    - range = max - min
    - nonuniformity_pct = (max - min) / (2 mean) * 100   (common practice: half-range
      over mean, the usual wafer-uniformity figure for film thickness)
    - std_over_mean_pct = std / mean * 100               (common practice: 1-sigma uniformity)

    With no finite value every number is NaN and n_sites is 0.
    """
    values = np.asarray(values, dtype=float)
    values = values[np.isfinite(values)]
    count = int(values.size)
    if count == 0:
        out = {key: math.nan for key in STAT_KEYS}
        out["n_sites"] = 0
        return out
    mean = float(values.mean())
    std = float(values.std(ddof=1)) if count > 1 else 0.0
    low, high = float(values.min()), float(values.max())
    spread = high - low
    return {
        "mean": mean,
        "std": std,
        "min": low,
        "max": high,
        "range": spread,
        "nonuniformity_pct": 100.0 * spread / (2.0 * mean) if mean != 0 else math.nan,
        "std_over_mean_pct": 100.0 * std / mean if mean != 0 else math.nan,
        "n_sites": count,
    }
