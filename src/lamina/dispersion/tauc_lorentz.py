"""Tauc-Lorentz law for amorphous semiconductors and dielectrics.

Source: G. E. Jellison Jr. and F. A. Modine, "Parameterization of the optical
functions of amorphous materials in the interband region", Appl. Phys. Lett. 69,
371 (1996), with the erratum Appl. Phys. Lett. 69, 2137 (1996).

eps2 is the product of the Tauc joint density of states and a Lorentz
oscillator; eps1 is its Kramers-Kronig transform in closed form.  Several
oscillators may share one gap Eg (the sum is still Kramers-Kronig consistent).

Parameters (model-file key, unit):

- ``eps_inf`` (-): the constant part of eps1 (contributions from transitions far
  above the measured range).
- ``gap_ev`` (eV): Tauc optical gap Eg; eps2 = 0 for E <= Eg.
- ``oscillators = [{amplitude_ev, center_ev, broadening_ev}, ...]``: per
  oscillator the amplitude A (eV), peak-transition energy E0 (eV) and
  broadening C (eV).  Local parameter names ``oscillators.1.amplitude_ev`` etc.

Physical bounds: A >= 0, Eg >= 0, C > 0, E0 > 0 and C < 2 E0 (the closed form
for eps1 needs alpha^2 = 4 E0^2 - C^2 > 0).
"""
from __future__ import annotations

import math
from typing import Mapping, Sequence

import numpy as np

from ..errors import LaminaInputError
from ..parameters import ParamSpec, as_param
from .base import (Dispersion, check_keys, list_key, list_length, list_to_toml, list_values, read_param_list,
                   require)

def xlogy(x, y):
    """x log(y), 0 where x = 0 (scipy.special.xlogy; imported on first use, since scipy.special
    costs a quarter of a second at start-up and most models never evaluate this law)."""
    from scipy.special import xlogy as _xlogy
    return _xlogy(x, y)


#: smallest broadening accepted (eV); C = 0 would make eps2 a delta function
MIN_BROADENING_EV = 1e-6

#: per-oscillator parameters of the Tauc-Lorentz law
TL_OSCILLATOR_SPECS = {
    "amplitude_ev": ParamSpec("amplitude_ev", "eV", 0.0, math.inf, "oscillator amplitude A"),
    "center_ev": ParamSpec("center_ev", "eV", MIN_BROADENING_EV, math.inf,
                           "peak-transition energy E0"),
    "broadening_ev": ParamSpec("broadening_ev", "eV", MIN_BROADENING_EV, math.inf,
                               "broadening C (must stay below 2 x center_ev)"),
}


# -- pure functions ---------------------------------------------------------------

def tauc_lorentz_eps2(photon_energy_ev, amplitude_ev, center_ev, broadening_ev, gap_ev):
    """Imaginary part of one Tauc-Lorentz oscillator (Jellison and Modine 1996).

    eps2(E) = A E0 C (E - Eg)^2 / [ ((E^2 - E0^2)^2 + C^2 E^2) E ]   for E > Eg,
    eps2(E) = 0                                                      for E <= Eg.

    Vectorized: parameters may be floats or (B, 1) arrays against energies (W,).
    """
    energy = np.asarray(photon_energy_ev, dtype=float)
    a, e0, c, eg = (np.asarray(x, dtype=float) for x in (amplitude_ev, center_ev, broadening_ev, gap_ev))
    above_gap = energy > eg
    # at E = 0 eps2 is 0 either way (E <= Eg, or Eg = 0 where eps2 ~ E); avoid 0/0
    safe_energy = np.where(energy > 0, energy, 1.0)
    lorentz = a * e0 * c / ((energy ** 2 - e0 ** 2) ** 2 + c ** 2 * energy ** 2)
    eps2 = lorentz * (energy - eg) ** 2 / safe_energy
    return np.where(above_gap, eps2, 0.0)


def _gap_log_term(energy, eg):
    """[(E + Eg)^2 ln(E + Eg) - (E - Eg)^2 ln|E - Eg|] / E, finite at E = Eg and E -> 0.

    This is the sum of the last two logarithms of the published eps1 multiplied
    by pi zeta^4 E / (A E0 C), rearranged so the ln|E - Eg| singularity (which
    cancels analytically at E = Eg) never reaches floating point.
    """
    plus = energy + eg
    minus = energy - eg
    safe_energy = np.where(energy > 0, energy, 1.0)
    direct = (xlogy(plus ** 2, plus) - xlogy(minus ** 2, np.abs(minus))) / safe_energy
    # Taylor series about E = 0: with g(x) = x^2 ln x, [g(Eg+E) - g(Eg-E)] / E
    # = 2 g'(Eg) + E^2 g'''(Eg) / 3 + O(E^4), g' = 2x ln x + x, g''' = 2 / x.
    safe_gap = np.where(eg > 0, eg, 1.0)
    series = 2.0 * (2.0 * xlogy(safe_gap, safe_gap) + safe_gap) + 2.0 * energy ** 2 / (3.0 * safe_gap)
    return np.where(energy < 1e-4 * eg, series, direct)


def tauc_lorentz_eps1_term(photon_energy_ev, amplitude_ev, center_ev, broadening_ev, gap_ev):
    """eps1 - eps_inf of one Tauc-Lorentz oscillator (closed form, Jellison and Modine 1996).

    With alpha = sqrt(4 E0^2 - C^2), gamma^2 = E0^2 - C^2 / 2,
    zeta^4 = (E^2 - gamma^2)^2 + alpha^2 C^2 / 4,
    a_ln = (Eg^2 - E0^2) E^2 + Eg^2 C^2 - E0^2 (E0^2 + 3 Eg^2),
    a_atan = (E^2 - E0^2)(E0^2 + Eg^2) + Eg^2 C^2:

    eps1 - eps_inf =
        A C a_ln / (2 pi zeta^4 alpha E0) ln[(E0^2 + Eg^2 + alpha Eg) / (E0^2 + Eg^2 - alpha Eg)]
      - A a_atan / (pi zeta^4 E0) [pi - atan((2 Eg + alpha) / C) + atan((alpha - 2 Eg) / C)]
      + 2 A E0 Eg (E^2 - gamma^2) / (pi zeta^4 alpha) [pi + 2 atan(2 (gamma^2 - Eg^2) / (alpha C))]
      - A E0 C (E^2 + Eg^2) / (pi zeta^4 E) ln(|E - Eg| / (E + Eg))
      + 2 A E0 C Eg / (pi zeta^4) ln[|E - Eg| (E + Eg) / sqrt((E0^2 - Eg^2)^2 + Eg^2 C^2)]

    (the corrected form of the erratum, as recalled from memory; the tests check
    it against a numerical Kramers-Kronig integral of eps2 to 1e-6).  The last
    two logarithms are combined (`_gap_log_term`) so that E = Eg and E -> 0 stay
    finite.  Requires C < 2 E0.
    """
    energy = np.asarray(photon_energy_ev, dtype=float)
    a, e0, c, eg = (np.asarray(x, dtype=float) for x in (amplitude_ev, center_ev, broadening_ev, gap_ev))
    e2, e02, eg2, c2 = energy ** 2, e0 ** 2, eg ** 2, c ** 2
    alpha = np.sqrt(4.0 * e02 - c2)
    gamma2 = e02 - c2 / 2.0
    zeta4 = (e2 - gamma2) ** 2 + alpha ** 2 * c2 / 4.0
    a_ln = (eg2 - e02) * e2 + eg2 * c2 - e02 * (e02 + 3.0 * eg2)
    a_atan = (e2 - e02) * (e02 + eg2) + eg2 * c2
    pre = a / (np.pi * zeta4)

    term_ln = pre * c * a_ln / (2.0 * alpha * e0) * np.log(
        (e02 + eg2 + alpha * eg) / (e02 + eg2 - alpha * eg))
    term_atan = -pre * a_atan / e0 * (
        np.pi - np.arctan((2.0 * eg + alpha) / c) + np.arctan((alpha - 2.0 * eg) / c))
    term_gamma = pre * 2.0 * e0 * eg * (e2 - gamma2) / alpha * (
        np.pi + 2.0 * np.arctan(2.0 * (gamma2 - eg2) / (alpha * c)))
    # last two published logarithms, combined: -(E-Eg)^2/E ln|E-Eg| + (E+Eg)^2/E ln(E+Eg)
    # - Eg ln((E0^2 - Eg^2)^2 + Eg^2 C^2)
    term_gap = pre * e0 * c * (_gap_log_term(energy, eg)
                               - xlogy(eg, (e02 - eg2) ** 2 + eg2 * c2))
    return term_ln + term_atan + term_gamma + term_gap


def tauc_lorentz_susceptibility(photon_energy_ev, gap_ev, oscillators: Sequence[Mapping]):
    """Sum over oscillators of eps1_term + i eps2 (epsilon minus eps_inf).

    `oscillators` holds mappings with ``amplitude_ev``, ``center_ev``,
    ``broadening_ev`` (floats or (B, 1) arrays), all sharing `gap_ev`.
    """
    total = 0.0
    for osc in oscillators:
        args = (osc["amplitude_ev"], osc["center_ev"], osc["broadening_ev"], gap_ev)
        total = total + tauc_lorentz_eps1_term(photon_energy_ev, *args) \
            + 1j * tauc_lorentz_eps2(photon_energy_ev, *args)
    return total


def tauc_lorentz_epsilon(photon_energy_ev, eps_inf, gap_ev, oscillators: Sequence[Mapping]):
    """Complex epsilon of the (multi-oscillator) Tauc-Lorentz law; see module docstring."""
    return eps_inf + tauc_lorentz_susceptibility(photon_energy_ev, gap_ev, oscillators)


# -- the law ----------------------------------------------------------------------

class TaucLorentz(Dispersion):
    """Tauc-Lorentz law (Jellison and Modine 1996): eps_inf, gap_ev, oscillators."""

    law = "tauc_lorentz"
    SPECS = {
        "eps_inf": ParamSpec("eps_inf", "", -math.inf, math.inf, "high-frequency dielectric constant"),
        "gap_ev": ParamSpec("gap_ev", "eV", 0.0, math.inf, "Tauc optical gap Eg"),
    }
    OSCILLATOR_SPECS = TL_OSCILLATOR_SPECS

    def __init__(self, eps_inf, gap_ev, oscillators, **meta):
        params = {"eps_inf": as_param(eps_inf, self.SPECS["eps_inf"], "eps_inf"),
                  "gap_ev": as_param(gap_ev, self.SPECS["gap_ev"], "gap_ev")}
        osc_params, osc_specs = read_param_list(oscillators, "oscillators", self.OSCILLATOR_SPECS,
                                                "oscillators")
        params.update(osc_params)
        super().__init__(params, {**self.SPECS, **osc_specs}, **meta)
        self.check_relations({k: prm.value for k, prm in self.params.items()})

    def check_relations(self, p: Mapping[str, object]) -> None:
        """Raise LaminaInputError when C >= 2 E0 for an oscillator (closed form undefined).

        Checked at construction and at every evaluation (a fit or a batch may
        move C and E0 independently); the message names the batch member.
        """
        for i in range(1, list_length(p, "oscillators") + 1):
            key = list_key("oscillators", i, "broadening_ev")
            c, e0 = np.broadcast_arrays(np.asarray(p[key], dtype=float),
                                        np.asarray(p[list_key("oscillators", i, "center_ev")], dtype=float))
            bad = np.flatnonzero(~(c < 2.0 * e0))      # also catches NaN
            if bad.size:
                first = bad[0]
                member = f" (batch member {first})" if c.ndim else ""
                raise LaminaInputError(
                    f"broadening_ev = {c.ravel()[first]:g} is not below 2 x center_ev = "
                    f"{2.0 * e0.ravel()[first]:g}{member}", key,
                    "broadening_ev < 2 x center_ev (the Tauc-Lorentz closed form needs it)")

    def _susceptibility(self, photon_energy_ev, p):
        """epsilon - eps_inf (the hook composite laws add up)."""
        self.check_relations(p)
        return tauc_lorentz_susceptibility(photon_energy_ev, p["gap_ev"],
                                           list_values(p, "oscillators", self.OSCILLATOR_SPECS))

    def _epsilon(self, photon_energy_ev, p):
        return p["eps_inf"] + self._susceptibility(photon_energy_ev, p)

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", "eps_inf", "gap_ev", "oscillators"}, where)
        eps_inf = as_param(require(table, "eps_inf", where), cls.SPECS["eps_inf"], f"{where}.eps_inf")
        gap = as_param(require(table, "gap_ev", where), cls.SPECS["gap_ev"], f"{where}.gap_ev")
        oscillators = require(table, "oscillators", where)
        # validate with the full key path first, so errors name the model-file place
        read_param_list(oscillators, "oscillators", cls.OSCILLATOR_SPECS, f"{where}.oscillators")
        try:
            return cls(eps_inf, gap, oscillators)
        except LaminaInputError as err:
            # relation errors name a local key; prefix it with the table's place
            raise LaminaInputError(err.problem, f"{where}.{err.where}" if err.where else where,
                                   err.expected) from None

    def to_toml(self):
        return {"law": self.law,
                "eps_inf": self.params["eps_inf"].to_toml(),
                "gap_ev": self.params["gap_ev"].to_toml(),
                "oscillators": list_to_toml(self.params, "oscillators", self.OSCILLATOR_SPECS)}
