"""Lorentz oscillators: the driven, damped bound-electron model.

A bound charge in a harmonic well (resonance E_j), damped (width Gamma_j) and
driven by the light's field, gives each oscillator a susceptibility; in photon
energy units (M. Fox, Optical Properties of Solids, 2nd ed. 2010;
F. Wooten, Optical Properties of Solids, 1972):

    eps(E) = eps_inf + sum_j A_j E_j^2 / (E_j^2 - E^2 - i Gamma_j E)

A_j (dimensionless) is the oscillator's contribution to the static constant:
eps(0) = eps_inf + sum_j A_j.  With exp(-i omega t) time dependence the
-i Gamma E term makes eps2 = A E_j^2 Gamma E / ((E_j^2 - E^2)^2 + Gamma^2 E^2) >= 0.
The law is causal (Kramers-Kronig consistent) and obeys the f-sum rule
int_0^inf E eps2(E) dE = (pi / 2) sum_j A_j E_j^2.

Model file:

    law = "lorentz"
    eps_inf = 1.0
    oscillators = [{amplitude = 1.1, center_ev = 10.5, broadening_ev = 0.1}]

Local parameter names: ``eps_inf``, ``oscillators.1.amplitude``,
``oscillators.1.center_ev``, ``oscillators.1.broadening_ev``.

The module also gives the dilute-medium helpers (`oscillator_susceptibility_si`,
`dilute_index`) for gases and vapours where the index is close to 1.
"""
from __future__ import annotations

import math
from typing import Mapping, Sequence

import numpy as np

from ..parameters import ParamSpec
from .base import (Dispersion, check_keys, coerce_params, list_to_toml, list_values, read_param_list,
                   read_params, require)

EPS_INF_SPEC = ParamSpec("eps_inf", "", 0.0, math.inf, "constant background of eps1 (transitions far above)")

OSCILLATOR_SPECS = {
    "amplitude": ParamSpec("amplitude", "", 0.0, math.inf, "contribution to the static eps, A_j"),
    "center_ev": ParamSpec("center_ev", "eV", 0.0, math.inf, "resonance energy E_j"),
    "broadening_ev": ParamSpec("broadening_ev", "eV", 0.0, math.inf, "damping width Gamma_j"),
}


# -- pure functions ---------------------------------------------------------------

def lorentz_oscillator(photon_energy_ev, amplitude, center_ev, broadening_ev):
    """Susceptibility of one oscillator: A E0^2 / (E0^2 - E^2 - i Gamma E).

    Source: Fox 2010, Optical Properties of Solids (written in
    photon energy, E = hbar omega); Wooten 1972.  Parameters may be floats
    or (B, 1) arrays against energies of shape (W,).
    """
    energy = np.asarray(photon_energy_ev, dtype=float)
    e0_sq = np.asarray(center_ev, dtype=float) ** 2
    return amplitude * e0_sq / (e0_sq - energy ** 2 - 1j * np.asarray(broadening_ev) * energy)


def lorentz_susceptibility(photon_energy_ev, oscillators: Sequence[Mapping]):
    """Sum of `lorentz_oscillator` over oscillators {amplitude, center_ev, broadening_ev}."""
    total = np.zeros(np.shape(photon_energy_ev), dtype=complex)
    for osc in oscillators:
        total = total + lorentz_oscillator(photon_energy_ev, osc["amplitude"], osc["center_ev"],
                                           osc["broadening_ev"])
    return total


def lorentz_epsilon(photon_energy_ev, eps_inf, oscillators: Sequence[Mapping]):
    """eps(E) = eps_inf + sum_j A_j E_j^2 / (E_j^2 - E^2 - i Gamma_j E) (see module docstring)."""
    return eps_inf + lorentz_susceptibility(photon_energy_ev, oscillators)


# -- dilute media ---------------------------------------------------------------------

def oscillator_susceptibility_si(number_density_m3, charge_c, mass_kg, resonance_rad_s,
                                 damping_rad_s, angular_frequency_rad_s):
    """Susceptibility chi of N bound charges per m^3 (SI units), one resonance.

    Newton's law for a charge q of mass m bound with resonance omega_0 and
    damped at rate gamma, driven by E0 exp(-i omega t), gives a dipole
    p = (q^2 / m) E / (omega_0^2 - omega^2 - i gamma omega); N of them per unit
    volume make P = eps0 chi E with

        chi = N q^2 / (eps0 m) * 1 / (omega_0^2 - omega^2 - i gamma omega)

    (J. D. Jackson, Classical Electrodynamics, 3rd ed. 1999, sec. 7.5, the dispersion model there written
    in SI form).  N q^2 / (eps0 m) is the square of the plasma frequency of the
    charges.  In the photon-energy form of `lorentz_oscillator` this is one
    oscillator with A = N q^2 / (eps0 m omega_0^2), E_0 = hbar omega_0 and
    Gamma = hbar gamma.
    """
    from scipy import constants  # imported here: scipy.constants is slow to import
    plasma_sq = np.asarray(number_density_m3, dtype=float) * np.asarray(charge_c, dtype=float) ** 2 / (
        constants.epsilon_0 * np.asarray(mass_kg, dtype=float))
    omega = np.asarray(angular_frequency_rad_s, dtype=float)
    return plasma_sq / (np.asarray(resonance_rad_s) ** 2 - omega ** 2 - 1j * np.asarray(damping_rad_s) * omega)


def dilute_index(chi):
    """Complex index of a dilute medium: N = sqrt(1 + chi) ~ 1 + chi / 2.

    Holds when |chi| << 1: gases and dilute vapours, where the error of the
    first-order expansion is about |chi|^2 / 8.  It fails for solids and liquids
    (chi of order 1 or more), and for any medium close to a strong resonance,
    where |chi| grows large; use `exact_index` (or a law object) there.  Local
    field corrections (Clausius-Mossotti) are also ignored, which again needs a
    dilute medium.
    """
    return 1.0 + 0.5 * np.asarray(chi, dtype=complex)


def exact_index(chi):
    """N = sqrt(1 + chi) on the branch with k >= 0 (the reference for `dilute_index`)."""
    return np.sqrt(1.0 + np.asarray(chi, dtype=complex))


# -- the law ------------------------------------------------------------------------

class Lorentz(Dispersion):
    """eps_inf plus a list of Lorentz oscillators {amplitude, center_ev, broadening_ev}."""

    law = "lorentz"
    SPECS = {"eps_inf": EPS_INF_SPEC}
    OSCILLATOR_SPECS = OSCILLATOR_SPECS

    def __init__(self, eps_inf=1.0, oscillators: Sequence[Mapping] = (), **meta):
        params = coerce_params({"eps_inf": eps_inf}, self.SPECS)
        osc_params, osc_specs = read_param_list(list(oscillators), "oscillators", self.OSCILLATOR_SPECS,
                                                "oscillators")
        super().__init__({**params, **osc_params}, {**self.SPECS, **osc_specs}, **meta)

    def _susceptibility(self, photon_energy_ev, p):
        return lorentz_susceptibility(photon_energy_ev, list_values(p, "oscillators", self.OSCILLATOR_SPECS))

    def _epsilon(self, photon_energy_ev, p):
        return p["eps_inf"] + self._susceptibility(photon_energy_ev, p)

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", "eps_inf", "oscillators"}, where)
        params = read_params(table, cls.SPECS, where, defaults={"eps_inf": 1.0})
        oscillators = require(table, "oscillators", where)
        read_param_list(oscillators, "oscillators", cls.OSCILLATOR_SPECS, f"{where}.oscillators")
        return cls(params["eps_inf"], oscillators)

    def to_toml(self):
        return {"law": self.law, "eps_inf": self.params["eps_inf"].to_toml(),
                "oscillators": list_to_toml(self.params, "oscillators", self.OSCILLATOR_SPECS)}
