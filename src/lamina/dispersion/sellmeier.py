"""Sellmeier law for transparent materials (glasses, crystals, dielectric films).

    n^2 = 1 + sum_i B_i lambda^2 / (lambda^2 - C_i)        (lambda in um, C_i in um^2)

(W. Sellmeier 1871; M. Born and E. Wolf, Principles of Optics, 7th ed. 1999).
Each term is a lossless Lorentz oscillator with its resonance at
lambda_i = sqrt(C_i); in photon energy B lambda^2 / (lambda^2 - C) =
B E_i^2 / (E_i^2 - E^2) with E_i = hc / sqrt(C).  No absorption: k = 0 (where
n^2 < 0, i.e. between a pole and its zero, N is imaginary; keep to the valid
range).  The susceptibility (for a ``sum`` law) is n^2 - 1.

Model file (local names ``terms.1.B``, ``terms.1.C_um2``, ...):

    law = "sellmeier"
    terms = [{B = 0.6961663, C_um2 = 0.004679148}, {B = 0.4079426, C_um2 = 0.01351206}]

C_um2 is the square of the resonance wavelength (um^2); data that tabulate the
resonance wavelength itself (refractiveindex.info "formula 1") must be squared.
"""
from __future__ import annotations

import math
from typing import Mapping, Sequence

import numpy as np

from ..parameters import ParamSpec
from ..units import HC_EV_NM
from .base import Dispersion, check_keys, list_to_toml, list_values, read_param_list, require

HC_EV_UM = HC_EV_NM / 1000.0

TERM_SPECS = {
    "B": ParamSpec("B", "", 0.0, math.inf, "strength of the term"),
    "C_um2": ParamSpec("C_um2", "um^2", 0.0, math.inf, "squared resonance wavelength"),
}


def sellmeier_susceptibility(photon_energy_ev, terms: Sequence[Mapping]):
    """n^2 - 1 = sum_i B_i lambda^2 / (lambda^2 - C_i), lambda = hc / E in um (Born and Wolf 1999)."""
    lambda_sq = (HC_EV_UM / np.asarray(photon_energy_ev, dtype=float)) ** 2
    total = np.zeros(np.shape(lambda_sq))
    for term in terms:
        total = total + term["B"] * lambda_sq / (lambda_sq - term["C_um2"])
    return total + 0j


def sellmeier_epsilon(photon_energy_ev, terms: Sequence[Mapping]):
    """eps = n^2 = 1 + sum_i B_i lambda^2 / (lambda^2 - C_i); see module docstring."""
    return 1.0 + sellmeier_susceptibility(photon_energy_ev, terms)


class Sellmeier(Dispersion):
    """Sellmeier law: a list of terms {B, C_um2}; eps = 1 + sum."""

    law = "sellmeier"
    BACKGROUND = None
    SPECS: dict = {}
    TERM_SPECS = TERM_SPECS

    def __init__(self, terms: Sequence[Mapping] = (), **meta):
        params, specs = read_param_list(list(terms), "terms", self.TERM_SPECS, "terms")
        super().__init__(params, specs, **meta)

    def _susceptibility(self, photon_energy_ev, p):
        return sellmeier_susceptibility(photon_energy_ev, list_values(p, "terms", self.TERM_SPECS))

    def _epsilon(self, photon_energy_ev, p):
        return 1.0 + self._susceptibility(photon_energy_ev, p)

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", "terms"}, where)
        terms = require(table, "terms", where)
        read_param_list(terms, "terms", cls.TERM_SPECS, f"{where}.terms")
        return cls(terms)

    def to_toml(self):
        return {"law": self.law, "terms": list_to_toml(self.params, "terms", self.TERM_SPECS)}
