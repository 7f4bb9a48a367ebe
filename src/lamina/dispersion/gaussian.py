"""Gaussian oscillators: Kramers-Kronig consistent bell-shaped absorption bands.

Source: D. De Sousa Meneses et al., J. Non-Cryst. Solids 352, 769 (2006)
(causal Gaussian bands with a Dawson-function dispersion; citation from
memory).  The eps1 below is derived here from the standard result that the
Hilbert transform of exp(-x^2) is (2 / sqrt(pi)) D(x), D being Dawson's
integral (Abramowitz and Stegun 1964, chapter 7, from memory); the tests check
it against a numerical Kramers-Kronig integral.

For each oscillator, with sigma = Br / (2 sqrt(ln 2)) so that Br is the full
width at half maximum of the band:

    eps2(E) = A [exp(-((E - E0) / sigma)^2) - exp(-((E + E0) / sigma)^2)]
    eps1(E) = eps_inf + (2 A / sqrt(pi)) [D((E + E0) / sigma) - D((E - E0) / sigma)]

The mirrored band at -E0 makes eps2 odd in E (as causality requires of a real
response) and keeps eps2 >= 0 for E >= 0.  eps1 follows from eps2 by
eps1(E) - eps_inf = (2 / pi) P int_0^inf E' eps2(E') / (E'^2 - E^2) dE'
(the tests check the sign and factor against that integral).

Parameters (model-file key, unit):

- ``eps_inf`` (-): constant part of eps1.
- ``oscillators = [{amplitude, center_ev, broadening_ev}, ...]``: peak height A
  of eps2 (dimensionless, >= 0), band centre E0 (eV, >= 0) and full width at
  half maximum Br (eV, > 0).  Local names ``oscillators.1.amplitude`` etc.
"""
from __future__ import annotations

import math
from typing import Mapping, Sequence

import numpy as np

from ..errors import LaminaInputError
from ..parameters import ParamSpec, as_param
from .base import Dispersion, check_keys, list_to_toml, list_values, read_param_list, require


def dawsn(x):
    """Dawson's integral (scipy.special.dawsn; imported on first use, see tauc_lorentz.xlogy)."""
    from scipy.special import dawsn as _dawsn
    return _dawsn(x)


#: sigma = FWHM / (2 sqrt(ln 2)) turns the full width at half maximum into the 1/e half width
FWHM_TO_SIGMA = 1.0 / (2.0 * math.sqrt(math.log(2.0)))

GAUSSIAN_OSCILLATOR_SPECS = {
    "amplitude": ParamSpec("amplitude", "", 0.0, math.inf, "peak height A of eps2"),
    "center_ev": ParamSpec("center_ev", "eV", 0.0, math.inf, "band centre E0"),
    "broadening_ev": ParamSpec("broadening_ev", "eV", 1e-6, math.inf, "full width at half maximum Br"),
}


def gaussian_susceptibility(photon_energy_ev, amplitude, center_ev, broadening_ev):
    """eps - eps_inf of one Gaussian oscillator (formula in the module docstring).

    Vectorized: parameters may be floats or (B, 1) arrays against energies (W,).
    """
    energy = np.asarray(photon_energy_ev, dtype=float)
    a, e0, br = (np.asarray(x, dtype=float) for x in (amplitude, center_ev, broadening_ev))
    sigma = br * FWHM_TO_SIGMA
    below = (energy - e0) / sigma
    above = (energy + e0) / sigma
    eps2 = a * (np.exp(-below ** 2) - np.exp(-above ** 2))
    eps1 = (2.0 * a / math.sqrt(math.pi)) * (dawsn(above) - dawsn(below))
    return eps1 + 1j * eps2


def gaussian_epsilon(photon_energy_ev, eps_inf, oscillators: Sequence[Mapping]):
    """eps_inf plus the sum of Gaussian oscillators ``{amplitude, center_ev, broadening_ev}``."""
    total = 0.0
    for osc in oscillators:
        total = total + gaussian_susceptibility(photon_energy_ev, osc["amplitude"], osc["center_ev"],
                                                osc["broadening_ev"])
    return eps_inf + total


class Gaussian(Dispersion):
    """Sum of Kramers-Kronig consistent Gaussian oscillators plus eps_inf."""

    law = "gaussian"
    SPECS = {"eps_inf": ParamSpec("eps_inf", "", -math.inf, math.inf, "high-frequency dielectric constant")}
    OSCILLATOR_SPECS = GAUSSIAN_OSCILLATOR_SPECS

    def __init__(self, eps_inf, oscillators, **meta):
        params = {"eps_inf": as_param(eps_inf, self.SPECS["eps_inf"], "eps_inf")}
        osc_params, osc_specs = read_param_list(oscillators, "oscillators", self.OSCILLATOR_SPECS,
                                                "oscillators")
        params.update(osc_params)
        super().__init__(params, {**self.SPECS, **osc_specs}, **meta)

    def _susceptibility(self, photon_energy_ev, p):
        """epsilon - eps_inf (the hook composite laws add up)."""
        return gaussian_epsilon(photon_energy_ev, 0.0, list_values(p, "oscillators", self.OSCILLATOR_SPECS))

    def _epsilon(self, photon_energy_ev, p):
        return p["eps_inf"] + self._susceptibility(photon_energy_ev, p)

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", "eps_inf", "oscillators"}, where)
        eps_inf = as_param(require(table, "eps_inf", where), cls.SPECS["eps_inf"], f"{where}.eps_inf")
        oscillators = require(table, "oscillators", where)
        # validate with the full key path before building (errors then name the model-file place)
        read_param_list(oscillators, "oscillators", cls.OSCILLATOR_SPECS, f"{where}.oscillators")
        try:
            return cls(eps_inf, oscillators)
        except LaminaInputError as err:
            raise LaminaInputError(err.problem, f"{where}.{err.where}" if err.where else where,
                                   err.expected) from None

    def to_toml(self):
        return {"law": self.law, "eps_inf": self.params["eps_inf"].to_toml(),
                "oscillators": list_to_toml(self.params, "oscillators", self.OSCILLATOR_SPECS)}
