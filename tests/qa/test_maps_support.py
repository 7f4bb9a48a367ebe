"""Synthetic wafer maps for the map tests, computed with the `tmm` package (the outside reference).

The film is dispersionless oxide (n = 1.46, from memory: fused silica is n = 1.457 at
632.8 nm, Malitson 1965) on a dispersionless Si substrate (N = 3.882 + 0.019i, the
632.8 nm value of the project's conventions).  Real films disperse; the constants keep
the test about the map machinery, while the optics come from tmm (Byrnes, tmm package,
"Multilayer optical calculations", arXiv:1603.02720, 2016).

Thickness profile: t(r) = 150 + 3 (r / 70 mm)^2 nm, a bowl, sites on rings at
r = 0, 24, 48, 72 mm (1 + 8 + 16 + 24 = 49 sites).  The tests here check tmm's
Delta convention against the anchor values before anything else uses it.
"""
from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import tmm

OXIDE_N = 1.46
SILICON_N = 3.882 + 0.019j
RING_RADII_MM = (0.0, 24.0, 48.0, 72.0)
RING_SITES = (1, 8, 16, 24)
PSI_SIGMA_DEG = 0.02
DELTA_SIGMA_DEG = 0.05


def true_thickness_nm(radius_mm):
    return 150.0 + 3.0 * (np.asarray(radius_mm, dtype=float) / 70.0) ** 2


def site_layout():
    """(labels, x_mm, y_mm) of the 49 sites, centre first, rings counter-clockwise from +x."""
    labels, xs, ys = [], [], []
    for radius, count in zip(RING_RADII_MM, RING_SITES):
        for j in range(count):
            theta = 2 * math.pi * j / count
            labels.append(str(len(labels) + 1))
            xs.append(round(radius * math.cos(theta), 6))
            ys.append(round(radius * math.sin(theta), 6))
    return labels, np.array(xs), np.array(ys)


def tmm_psi_delta(thickness_nm, wavelength_nm, angle_deg):
    """Psi, Delta (deg, lamina convention) of ambient / oxide / Si from tmm.

    tmm.ellips returns Delta_tmm = angle(-rp/rs) in its own rp sign convention; the
    anchors of lamina's convention (bare Si at 70 deg, 632.8 nm: Delta = 179.23; an
    absorbing N = 0.2 + 3.3i: Delta = 106.18, checked below) give
    Delta = (180 - Delta_tmm) mod 360.
    """
    psi = np.empty((len(angle_deg), len(wavelength_nm)))
    delta = np.empty_like(psi)
    for a, angle in enumerate(angle_deg):
        for w, wavelength in enumerate(wavelength_nm):
            result = tmm.ellips([1.0, OXIDE_N, SILICON_N], [np.inf, thickness_nm, np.inf],
                                math.radians(angle), wavelength)
            psi[a, w] = math.degrees(result["psi"])
            delta[a, w] = (180.0 - math.degrees(result["Delta"])) % 360.0
    return psi, delta


def bare_delta(n_complex, angle_deg=70.0, wavelength_nm=632.8):
    result = tmm.ellips([1.0, n_complex], [np.inf, np.inf], math.radians(angle_deg), wavelength_nm)
    return math.degrees(result["psi"]), (180.0 - math.degrees(result["Delta"])) % 360.0


def make_map_rows(wavelength_nm, angle_deg, seed=7, wafer=None, labels=None, x_mm=None, y_mm=None):
    """Long-form CSV rows (dicts) of a noisy 49-site map; also the true thickness per site."""
    rng = np.random.default_rng(seed)
    if labels is None:
        labels, x_mm, y_mm = site_layout()
    truth = true_thickness_nm(np.hypot(x_mm, y_mm))
    rows = []
    for label, x, y, thickness in zip(labels, x_mm, y_mm, truth):
        psi, delta = tmm_psi_delta(thickness, wavelength_nm, angle_deg)
        psi = psi + rng.normal(0.0, PSI_SIGMA_DEG, psi.shape)
        delta = (delta + rng.normal(0.0, DELTA_SIGMA_DEG, delta.shape)) % 360.0
        for a, angle in enumerate(angle_deg):
            for w, wavelength in enumerate(wavelength_nm):
                row = {"site": label, "x_mm": f"{x:.6f}", "y_mm": f"{y:.6f}"}
                if wafer is not None:
                    row["wafer"] = wafer
                row.update({"wavelength_nm": f"{wavelength:.6f}", "angle_deg": f"{angle:g}",
                            "psi_deg": f"{psi[a, w]:.8f}", "delta_deg": f"{delta[a, w]:.8f}",
                            "psi_err_deg": f"{PSI_SIGMA_DEG:g}", "delta_err_deg": f"{DELTA_SIGMA_DEG:g}"})
                rows.append(row)
    return rows, dict(zip(labels, truth))


def write_map_csv(path, rows):
    path = Path(path)
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)
    return path


def oxide_model_toml(start_nm=149.0):
    """Model file text: oxide (free thickness) on Si, both dispersionless as in the data."""
    return f"""# synthetic test model: constant-index oxide on constant-index Si
[[layers]]
name = "oxide"
material = {{ law = "constant", n = {OXIDE_N} }}
thickness_nm = {{ value = {start_nm}, min = 100.0, max = 200.0 }}

[substrate]
material = {{ law = "constant", n = {SILICON_N.real}, k = {SILICON_N.imag} }}
"""


def oxide_stack(start_nm=149.0):
    from lamina.dispersion.constant import Constant
    from lamina.parameters import Param
    from lamina.stack.layers import Layer, Stack
    film = Layer("oxide", Constant(OXIDE_N, 0.0), Param(start_nm, 100.0, 200.0, vary=True, unit="nm"))
    return Stack([film], Constant(SILICON_N.real, SILICON_N.imag))


# -- the convention anchors (fail here first if tmm's Delta is converted wrongly) -------

def test_tmm_delta_conversion_matches_the_bare_silicon_anchor():
    # anchor of lamina's convention (DEVELOPERS.md): bare Si, 70 deg, 632.8 nm -> Psi 10.57, Delta 179.23
    psi, delta = bare_delta(SILICON_N)
    assert abs(psi - 10.57) < 0.01
    assert abs(delta - 179.23) < 0.01


def test_tmm_delta_conversion_matches_the_absorbing_anchor():
    # anchor: N = 0.2 + 3.3i at 70 deg -> Psi 43.46, Delta 106.18 (0 < Delta < 180 for absorbers)
    psi, delta = bare_delta(0.2 + 3.3j)
    assert abs(psi - 43.46) < 0.01
    assert abs(delta - 106.18) < 0.01


def test_layout_has_49_sites_and_the_known_profile():
    labels, x_mm, y_mm = site_layout()
    assert len(labels) == 49 and len(set(labels)) == 49
    radius = np.hypot(x_mm, y_mm)
    assert np.allclose(sorted(set(np.round(radius, 3))), RING_RADII_MM)
    assert np.isclose(true_thickness_nm(70.0), 153.0)
