"""Kramers-Kronig test helper: eps1 from eps2 by a numerical principal-value integral.

    eps1(E) - eps_inf = (2 / pi) P int_0^inf E' eps2(E') / (E'^2 - E^2) dE'

(the Kramers-Kronig relation for a causal response with exp(-i omega t);
F. Wooten, Optical Properties of Solids, 1972; M. Dressel and
G. Gruner, Electrodynamics of Solids, 2002)

Used to check that a law's closed-form eps1 is the causal partner of its eps2.
The principal value is taken by QUADPACK's Cauchy-weighted rule (scipy.integrate.quad
with weight="cauchy", which computes P int f(x) / (x - c) dx) after writing

    E' eps2(E') / (E'^2 - E^2) = [E' eps2(E') / (E' + E)] / (E' - E),

on a finite interval around E; the rest of [0, inf) is a regular integral.
Kinks of eps2 (a band gap) can be given as `breakpoints_ev` so that the regular
pieces are split there.

Usage (a colleague's law works the same way):

    from kk import kk_eps1_minus_background   # tests run with importlib mode: see below
    eps2 = lambda e: law.epsilon_ev(e).imag
    numeric = kk_eps1_minus_background(eps2, energies, breakpoints_ev=(gap,))

Import it by path (pytest's importlib mode has no package for tests/):

    import importlib.util, pathlib
    spec = importlib.util.spec_from_file_location("kk", pathlib.Path(__file__).with_name("kk.py"))
"""
from __future__ import annotations

import math
from typing import Callable, Sequence

import numpy as np
from scipy.integrate import quad


#: E' eps2(E') is evaluated no closer to 0 than this (eV): laws with a free-carrier
#: term have eps2 ~ 1/E' while E' eps2(E') stays finite
_SMALLEST_EV = 1e-9


def _weighted(fn: Callable) -> Callable[[float], float]:
    """x -> x eps2(x) as a scalar function for QUADPACK, from a vectorized eps2(E)."""
    def weighted(x: float) -> float:
        x = max(x, _SMALLEST_EV)
        return x * float(np.asarray(fn(np.array([x]))).reshape(-1)[0])
    return weighted


def kk_eps1_minus_background(eps2_of_energy: Callable, energies_ev: Sequence[float], *,
                             breakpoints_ev: Sequence[float] = (), upper_ev: float = math.inf,
                             limit: int = 400) -> np.ndarray:
    """(2/pi) P int_0^upper E' eps2(E') / (E'^2 - E^2) dE' at each E in `energies_ev`.

    `eps2_of_energy` takes an array of energies (eV) and returns eps2 (>= 0).
    `upper_ev` cuts the integral (inf by default: the law's tail counts too).
    Each E must be > 0 and not a breakpoint.
    """
    weighted = _weighted(eps2_of_energy)
    out = []
    for energy in np.asarray(energies_ev, dtype=float):
        out.append(2.0 / math.pi * _principal_value(weighted, energy, sorted(breakpoints_ev), upper_ev, limit))
    return np.array(out)


def _principal_value(weighted, energy: float, breakpoints: list, upper: float, limit: int) -> float:
    # the singular piece: an interval around E that no breakpoint enters
    below = max([0.0] + [b for b in breakpoints if b < energy])
    above = min([2.0 * energy + 1.0, upper] + [b for b in breakpoints if b > energy])
    lo = 0.5 * (below + energy) if below > 0 else 0.0
    hi = 0.5 * (energy + above) if above < min(2.0 * energy + 1.0, upper) else above
    singular, _ = quad(lambda x: weighted(x) / (x + energy), lo, hi, weight="cauchy", wvar=energy,
                       limit=limit)
    total = singular
    # regular pieces: [0, lo] and [hi, upper], split at breakpoints
    edges_low = [0.0] + [b for b in breakpoints if 0.0 < b < lo] + [lo]
    edges_high = [hi] + [b for b in breakpoints if hi < b < upper] + [upper]

    def integrand(x):
        return weighted(x) / (x * x - energy * energy)

    for a, b in zip(edges_low[:-1], edges_low[1:]):
        if b > a:
            total += quad(integrand, a, b, limit=limit)[0]
    for a, b in zip(edges_high[:-1], edges_high[1:]):
        if b > a:
            total += quad(integrand, a, b, limit=limit)[0]
    return total
