"""Cauchy law for transparent films, with an optional exponential absorption tail.

    n(lambda) = A + B / lambda^2 + C / lambda^4        (lambda in micrometres)
    k(E)      = k_amplitude * exp((E - edge_ev) / urbach_ev)

The index is Cauchy's series (A. L. Cauchy 1836; F. A. Jenkins and H. E. White,
Fundamentals of Optics, 4th ed. 1976); the tail is Urbach's
exponential absorption edge (F. Urbach, Phys. Rev. 92, 1324 (1953)) written for
k: k equals `k_amplitude` at the photon energy `edge_ev` and falls by a factor e
for every `urbach_ev` below it.  The tail is off by default (k_amplitude = 0).
eps = (n + i k)^2.

Empirical: n and k are independent, so the law is not Kramers-Kronig
consistent, and it is meant for the transparent (or weakly absorbing) range of
a film only: use it well below the absorption edge.

Model file:

    law = "cauchy"
    A = 1.45
    B_um2 = 0.0036
    C_um4 = 0.0
    # optional tail
    k_amplitude = 0.0
    edge_ev = 4.0
    urbach_ev = 0.2
"""
from __future__ import annotations

import math

import numpy as np

from ..parameters import Param, ParamSpec
from ..units import HC_EV_NM
from .base import Dispersion, check_keys, coerce_params, read_params

#: h c in eV um: lambda [um] = HC_EV_UM / E [eV]
HC_EV_UM = HC_EV_NM / 1000.0

#: defaults of the optional parameters (tail off)
DEFAULTS = {"C_um4": 0.0, "k_amplitude": 0.0, "edge_ev": 4.0, "urbach_ev": 0.2}
TAIL_KEYS = ("k_amplitude", "edge_ev", "urbach_ev")


def cauchy_n(photon_energy_ev, a, b_um2, c_um4):
    """n = A + B / lambda^2 + C / lambda^4, lambda = hc / E in um (Jenkins and White 1976)."""
    inv_lambda_sq = (np.asarray(photon_energy_ev, dtype=float) / HC_EV_UM) ** 2
    return a + b_um2 * inv_lambda_sq + c_um4 * inv_lambda_sq ** 2


def urbach_k(photon_energy_ev, k_amplitude, edge_ev, urbach_ev):
    """k = k_amplitude exp((E - edge_ev) / urbach_ev) (Urbach 1953, exponential edge)."""
    energy = np.asarray(photon_energy_ev, dtype=float)
    return k_amplitude * np.exp((energy - edge_ev) / urbach_ev)


def cauchy_epsilon(photon_energy_ev, a, b_um2, c_um4, k_amplitude=0.0, edge_ev=4.0, urbach_ev=0.2):
    """eps = (n + i k)^2 with Cauchy n and an Urbach k tail; see module docstring."""
    n = cauchy_n(photon_energy_ev, a, b_um2, c_um4)
    k = urbach_k(photon_energy_ev, k_amplitude, edge_ev, urbach_ev)
    return (n + 1j * k) ** 2


class Cauchy(Dispersion):
    """Cauchy index A, B_um2, C_um4 with an optional Urbach tail k_amplitude, edge_ev, urbach_ev."""

    law = "cauchy"
    BACKGROUND = None
    SPECS = {
        "A": ParamSpec("A", "", 0.0, math.inf, "index at infinite wavelength"),
        "B_um2": ParamSpec("B_um2", "um^2", -math.inf, math.inf, "coefficient of 1/lambda^2"),
        "C_um4": ParamSpec("C_um4", "um^4", -math.inf, math.inf, "coefficient of 1/lambda^4"),
        "k_amplitude": ParamSpec("k_amplitude", "", 0.0, math.inf, "extinction coefficient at edge_ev"),
        "edge_ev": ParamSpec("edge_ev", "eV", 0.0, math.inf, "photon energy where k = k_amplitude"),
        "urbach_ev": ParamSpec("urbach_ev", "eV", 1e-4, math.inf, "Urbach energy: k falls by e per urbach_ev"),
    }

    def __init__(self, A=1.5, B_um2=0.0, C_um4=0.0, k_amplitude=0.0, edge_ev=4.0, urbach_ev=0.2, **meta):
        values = {"A": A, "B_um2": B_um2, "C_um4": C_um4, "k_amplitude": k_amplitude,
                  "edge_ev": edge_ev, "urbach_ev": urbach_ev}
        super().__init__(coerce_params(values, self.SPECS), self.SPECS, **meta)

    def _epsilon(self, photon_energy_ev, p):
        return cauchy_epsilon(photon_energy_ev, p["A"], p["B_um2"], p["C_um4"],
                              p["k_amplitude"], p["edge_ev"], p["urbach_ev"])

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", *cls.SPECS}, where)
        return cls(**read_params(table, cls.SPECS, where, defaults=DEFAULTS))

    def to_toml(self):
        out = {"law": self.law}
        for key, prm in self.params.items():
            # optional keys left at their default stay out of the file
            if key in DEFAULTS and prm == Param(DEFAULTS[key], unit=self.specs[key].unit):
                continue
            out[key] = prm.to_toml()
        return out
