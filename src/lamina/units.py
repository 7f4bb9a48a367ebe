"""Unit conversions used everywhere in lamina (the one place they live).

Wavelength is in nm, photon energy in eV, thickness in nm, angles in degrees.
E [eV] = h c / lambda = 1239.841984 / lambda [nm]  (CODATA 2018: h c = 1239.84198... eV nm).
"""
from __future__ import annotations

import numpy as np

#: h*c in eV*nm (CODATA 2018, exact h and c, e).
HC_EV_NM = 1239.841984


def wavelength_nm_to_ev(wavelength_nm):
    """Photon energy in eV for a vacuum wavelength in nm: E = hc / lambda."""
    return HC_EV_NM / np.asarray(wavelength_nm, dtype=float)


def ev_to_wavelength_nm(photon_energy_ev):
    """Vacuum wavelength in nm for a photon energy in eV: lambda = hc / E."""
    return HC_EV_NM / np.asarray(photon_energy_ev, dtype=float)


def nk_from_epsilon(epsilon):
    """Complex index N = n + ik from eps = N**2, on the branch with k >= 0 (and n >= 0).

    numpy's principal square root has a non-negative real part; for eps2 >= 0
    it also gives k >= 0.  For eps2 < 0 (gain, unphysical) the sign of k is
    kept as the math gives it so the problem stays visible.
    """
    return np.sqrt(np.asarray(epsilon, dtype=complex))


def epsilon_from_nk(n_complex):
    """Dielectric function eps = N**2 for N = n + ik."""
    n_complex = np.asarray(n_complex, dtype=complex)
    return n_complex * n_complex
