"""Constant complex index: N = n + ik at every wavelength.

eps = (n + ik)^2 = n^2 - k^2 + 2nki.  No dispersion; useful for ambient media,
quick what-if models and as a first guess.  Not Kramers-Kronig consistent when
k > 0 (a constant k over all energies has no causal partner).
"""
from __future__ import annotations

import numpy as np

from ..parameters import ParamSpec
from .base import Dispersion, check_keys, read_params


def constant_epsilon(photon_energy_ev, n, k):
    """eps = (n + i k)^2, independent of photon energy."""
    n_complex = np.asarray(n) + 1j * np.asarray(k)
    return np.zeros_like(np.asarray(photon_energy_ev, dtype=float)) + n_complex * n_complex


class Constant(Dispersion):
    """Constant index N = n + ik."""

    law = "constant"
    SPECS = {
        "n": ParamSpec("n", "", 0.0, np.inf, "real part of the refractive index"),
        "k": ParamSpec("k", "", 0.0, np.inf, "extinction coefficient"),
    }

    def __init__(self, n: float = 1.0, k: float = 0.0, **meta):
        from ..parameters import as_param
        super().__init__({"n": as_param(n, self.SPECS["n"], "n"), "k": as_param(k, self.SPECS["k"], "k")},
                         self.SPECS, **meta)

    def _epsilon(self, photon_energy_ev, p):
        return constant_epsilon(photon_energy_ev, p["n"], p["k"])

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", "n", "k"}, where)
        params = read_params(table, cls.SPECS, where, defaults={"k": 0.0})
        return cls(params["n"], params["k"])

    def to_toml(self):
        return {"law": self.law, "n": self.params["n"].to_toml(), "k": self.params["k"].to_toml()}
