"""Synthetic measurements made with the `tmm` package (Byrnes, arXiv:1603.02720), not lamina's solver.

Loaded by the tests of this folder with importlib (pytest runs in importlib
mode), e.g. ``tmm_data = load_helper()`` as in test_recovery.py.

Delta convention: ``tmm.ellips`` returns Delta_tmm = angle(-r_p / r_s) (radians)
with its own r_p sign; lamina's Delta (degrees, [0, 360), DEVELOPERS.md) is
(180 - Delta_tmm[deg]) mod 360.  `test_tmm_convention` checks this against the
anchor values of the convention (bare N = 0.2 + 3.3i at 70 deg: Psi = 43.46,
Delta = 106.18; bare Si N = 3.882 + 0.019i at 70 deg, 632.8 nm: Delta = 179.23).
"""
from __future__ import annotations

import numpy as np
import tmm
import xarray as xr

HC_EV_NM = 1239.841984


def delta_from_tmm_deg(delta_tmm_rad):
    """lamina's Delta (deg, [0, 360)) from tmm's Delta (rad)."""
    return np.mod(180.0 - np.degrees(delta_tmm_rad), 360.0)


def malitson_sio2(wavelength_nm):
    """Fused silica, Malitson, J. Opt. Soc. Am. 55, 1205 (1965), three-term Sellmeier (lambda in um)."""
    lam2 = (np.asarray(wavelength_nm, dtype=float) / 1000.0) ** 2
    n2 = 1 + 0.6961663 * lam2 / (lam2 - 0.0684043 ** 2) + 0.4079426 * lam2 / (lam2 - 0.1162414 ** 2) \
        + 0.8974794 * lam2 / (lam2 - 9.896161 ** 2)
    return np.sqrt(n2)


def lorentz_index(wavelength_nm, eps_inf, amplitude, center_ev, broadening_ev):
    """N of one Lorentz oscillator, eps = eps_inf + A E0^2 / (E0^2 - E^2 - i G E) (Fox 2010, eq. 2.16)."""
    energy = HC_EV_NM / np.asarray(wavelength_nm, dtype=float)
    eps = eps_inf + amplitude * center_ev ** 2 / (center_ev ** 2 - energy ** 2 - 1j * broadening_ev * energy)
    return np.sqrt(eps)


def ellipsometry(indices, thicknesses_nm, angles_deg, wavelengths_nm, sigma_psi=0.0, sigma_delta=0.0,
                 rng=None, with_err=True, label="tmm-synthetic"):
    """Dataset (angle, wavelength) of psi, delta from tmm.ellips, plus Gaussian noise.

    indices: list of callables wavelength_nm -> complex N (ambient first, substrate last);
    thicknesses_nm: thicknesses of the inner layers.
    """
    angles = np.asarray(angles_deg, dtype=float)
    wavelengths = np.asarray(wavelengths_nm, dtype=float)
    psi = np.empty((angles.size, wavelengths.size))
    delta = np.empty_like(psi)
    n_tables = [np.broadcast_to(np.asarray(f(wavelengths), dtype=complex), wavelengths.shape) for f in indices]
    d_list = [np.inf] + list(thicknesses_nm) + [np.inf]
    for i, angle in enumerate(angles):
        for j, wl in enumerate(wavelengths):
            res = tmm.ellips([n[j] for n in n_tables], d_list, np.radians(angle), wl)
            psi[i, j] = np.degrees(res["psi"])
            delta[i, j] = delta_from_tmm_deg(res["Delta"])
    rng = rng if rng is not None else np.random.default_rng(0)
    if sigma_psi:
        psi = psi + rng.normal(0.0, sigma_psi, psi.shape)
    if sigma_delta:
        delta = np.mod(delta + rng.normal(0.0, sigma_delta, delta.shape), 360.0)
    dims = ("angle", "wavelength")
    data = {"psi": (dims, psi), "delta": (dims, delta)}
    if with_err:
        data["psi_err"] = (dims, np.full(psi.shape, sigma_psi or 0.02))
        data["delta_err"] = (dims, np.full(psi.shape, sigma_delta or 0.05))
    return xr.Dataset(data, coords={"angle": angles, "wavelength": wavelengths},
                      attrs={"source_file": label, "sha256": "0" * 64})


def slab_rt(film_index, film_nm, slab_index, slab_mm, wavelengths_nm, sigma=0.0, rng=None, with_err=True,
            label="tmm-rt"):
    """Dataset (angle = 0, wavelength) of R, T of air / coherent film / incoherent slab / air (tmm.inc_tmm)."""
    wavelengths = np.asarray(wavelengths_nm, dtype=float)
    film = np.broadcast_to(np.asarray(film_index(wavelengths), dtype=complex), wavelengths.shape)
    slab = np.broadcast_to(np.asarray(slab_index(wavelengths), dtype=complex), wavelengths.shape)
    R = np.empty((1, wavelengths.size))
    T = np.empty_like(R)
    for j, wl in enumerate(wavelengths):
        res = tmm.inc_tmm("s", [1.0, film[j], slab[j], 1.0], [np.inf, film_nm, slab_mm * 1e6, np.inf],
                          ["i", "c", "i", "i"], 0.0, wl)
        R[0, j], T[0, j] = res["R"], res["T"]
    rng = rng if rng is not None else np.random.default_rng(0)
    if sigma:
        R = R + rng.normal(0.0, sigma, R.shape)
        T = T + rng.normal(0.0, sigma, T.shape)
    dims = ("angle", "wavelength")
    data = {"R": (dims, R), "T": (dims, T)}
    if with_err:
        data["R_err"] = (dims, np.full(R.shape, sigma or 0.002))
        data["T_err"] = (dims, np.full(T.shape, sigma or 0.002))
    return xr.Dataset(data, coords={"angle": [0.0], "wavelength": wavelengths},
                      attrs={"source_file": label, "sha256": "0" * 64})


def load():
    """This module (for `importlib`-mode test files)."""
    import sys
    return sys.modules[__name__]
