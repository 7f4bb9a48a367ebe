"""Drude law: free carriers (metals, doped semiconductors, transparent conductors).

A Lorentz oscillator with no restoring force (resonance at E = 0):

    eps(E) = eps_inf - Ep^2 / (E^2 + i Gamma E)

Ep is the unscreened plasma energy (hbar omega_p, omega_p^2 = N e^2 / (eps0 m*)),
Gamma = hbar / tau the scattering rate (P. Drude 1900; M. Dressel and G. Gruner,
Electrodynamics of Solids, 2002; Fox 2010).  With
exp(-i omega t): eps2 = Ep^2 Gamma / (E (E^2 + Gamma^2)) >= 0.  Causal
(Kramers-Kronig consistent); diverges as E -> 0 (the DC conductivity).

Model file:

    law = "drude"
    eps_inf = 1.0
    plasma_ev = 9.0
    broadening_ev = 0.05
"""
from __future__ import annotations

import math

import numpy as np

from ..parameters import ParamSpec
from .base import Dispersion, check_keys, coerce_params, read_params
from .lorentz import EPS_INF_SPEC


def drude_susceptibility(photon_energy_ev, plasma_ev, broadening_ev):
    """-Ep^2 / (E^2 + i Gamma E) (Dressel and Gruner 2002, in photon energy)."""
    energy = np.asarray(photon_energy_ev, dtype=float)
    return -np.asarray(plasma_ev, dtype=float) ** 2 / (energy ** 2 + 1j * np.asarray(broadening_ev) * energy)


def drude_epsilon(photon_energy_ev, eps_inf, plasma_ev, broadening_ev):
    """eps(E) = eps_inf - Ep^2 / (E^2 + i Gamma E); see module docstring."""
    return eps_inf + drude_susceptibility(photon_energy_ev, plasma_ev, broadening_ev)


class Drude(Dispersion):
    """Free-carrier law: eps_inf, plasma_ev, broadening_ev."""

    law = "drude"
    SPECS = {
        "eps_inf": EPS_INF_SPEC,
        "plasma_ev": ParamSpec("plasma_ev", "eV", 0.0, math.inf, "unscreened plasma energy Ep"),
        "broadening_ev": ParamSpec("broadening_ev", "eV", 0.0, math.inf, "carrier scattering rate Gamma"),
    }

    def __init__(self, eps_inf=1.0, plasma_ev=1.0, broadening_ev=0.1, **meta):
        params = coerce_params({"eps_inf": eps_inf, "plasma_ev": plasma_ev, "broadening_ev": broadening_ev},
                               self.SPECS)
        super().__init__(params, self.SPECS, **meta)

    def _susceptibility(self, photon_energy_ev, p):
        return drude_susceptibility(photon_energy_ev, p["plasma_ev"], p["broadening_ev"])

    def _epsilon(self, photon_energy_ev, p):
        return p["eps_inf"] + self._susceptibility(photon_energy_ev, p)

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", *cls.SPECS}, where)
        params = read_params(table, cls.SPECS, where, defaults={"eps_inf": 1.0})
        return cls(**params)

    def to_toml(self):
        return {"law": self.law, **{key: prm.to_toml() for key, prm in self.params.items()}}
