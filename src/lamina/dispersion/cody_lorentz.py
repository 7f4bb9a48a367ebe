"""Cody-Lorentz law: amorphous films with a Cody absorption onset and an Urbach tail.

Source: A. S. Ferlauto, G. M. Ferreira, J. M. Pearce, C. R. Wronski, R. W.
Collins, X. Deng and G. Ganguly, "Analytical model for the optical functions
of amorphous semiconductors from the near-infrared to ultraviolet:
Applications in thin film photovoltaics", J. Appl. Phys. 92, 2424 (2002).

    eps2(E) = G(E) L(E)                          for E > Et
    eps2(E) = (E1 / E) exp((E - Et) / Eu)        for 0 < E <= Et   (Urbach tail)

    G(E) = (E - Eg)^2 / ((E - Eg)^2 + Ep^2)   for E > Eg, 0 below (the Cody gap factor)
    L(E) = A E0 Gamma E / ((E^2 - E0^2)^2 + Gamma^2 E^2)   (Lorentz oscillator)
    E1   = Et G(Et) L(Et)                    (makes eps2 continuous at Et)

Near the gap eps2 grows like (E - Eg)^2 (the Cody form, constant dipole
matrix element); far above Eg + Ep, G -> 1 and eps2 takes the Lorentz shape.
eps1 = eps_inf + (2 / pi) P int_0^inf E' eps2(E') / (E'^2 - E^2) dE' is computed
numerically (`kramers_kronig_eps1`): E' eps2 is sampled on a grid shared by
all batch members, taken piecewise quadratic over panels of two steps, and
each panel is integrated against the Kramers-Kronig kernel in closed form (a
product-integration rule), so the principal value needs no special care; the
panel that holds the kink of eps2 (at Et, or at Eg without a tail) is split
there, and beyond the grid the asymptotic E'^-3 tail is added.  The weights
depend on the grid and the energies only, so a fit reuses them (cache).
Measured against an adaptive quadrature (tests): about 1e-5 for the usual
parameters, up to 2e-4 for narrow, tall peaks (eps2 ~ 100).

Note: G(E) has (E - Eg)^2 in the numerator, as published, so that eps2
vanishes at Eg and starts in the Cody form.

Parameters (model-file key, unit):

- ``eps_inf`` (-): constant part of eps1.
- ``amplitude_ev`` A (eV, >= 0): oscillator amplitude.
- ``center_ev`` E0 (eV, > 0): Lorentz peak-transition energy.
- ``broadening_ev`` Gamma (eV, > 0): Lorentz broadening.
- ``gap_ev`` Eg (eV, >= 0): Cody optical gap.
- ``transition_ev`` Ep (eV, > 0): energy above Eg over which the absorption
  onset turns from the Cody (E - Eg)^2 form to the Lorentz form.
- ``tail_onset_ev`` Et (eV): where the Urbach tail takes over; 0 = no tail
  (eps2 = 0 below Eg), otherwise Et >= Eg.  (During a fit an Et that drifts
  below Eg simply gives no tail, since G(Et) = 0 there.)
- ``urbach_ev`` Eu (eV, > 0): Urbach energy, the exponential decay of the tail.
"""
from __future__ import annotations

import functools
import math
from collections import OrderedDict

import numpy as np

from ..errors import LaminaInputError
from ..parameters import ParamSpec, as_param
from .base import Dispersion, check_keys, read_params

#: default Urbach energy (eV) when the model has no tail and the key is left out
DEFAULT_URBACH_EV = 0.05

# -- the Kramers-Kronig integration grid -------------------------------------------
#: coarsest step (eV) of the uniform part of the grid
MAX_STEP_EV = 0.01
#: finest step (eV); narrower features are integrated less accurately (and memory stays bounded)
MIN_STEP_EV = 0.00125
#: the step is at most broadening / 80, transition energy / 10 and, below the tail onset,
#: Urbach energy / 20 (measured: eps1 then agrees with an adaptive quadrature to ~2e-4 or
#: better for peaks eps2 up to ~100)
STEPS_PER_BROADENING, STEPS_PER_URBACH, STEPS_PER_TRANSITION = 80, 20, 10
#: growth factor of the step beyond the uniform part, and the largest step relative to E
STEP_GROWTH, MAX_RELATIVE_STEP = 1.03, 0.02
#: where the grid ends (eV); beyond it the eps2 ~ A E0 Gamma / E^3 tail is added analytically
GRID_END_EV = 2000.0


def cody_gap_factor(photon_energy_ev, gap_ev, transition_ev):
    """G(E) = (E - Eg)^2 / ((E - Eg)^2 + Ep^2) above Eg, 0 at and below Eg (Ferlauto et al. 2002)."""
    above = np.maximum(np.asarray(photon_energy_ev, dtype=float) - gap_ev, 0.0)
    return above ** 2 / (above ** 2 + np.asarray(transition_ev, dtype=float) ** 2)


def lorentz_factor(photon_energy_ev, amplitude_ev, center_ev, broadening_ev):
    """L(E) = A E0 Gamma E / ((E^2 - E0^2)^2 + Gamma^2 E^2) (Ferlauto et al. 2002)."""
    energy = np.asarray(photon_energy_ev, dtype=float)
    return (amplitude_ev * center_ev * broadening_ev * energy
            / ((energy ** 2 - center_ev ** 2) ** 2 + broadening_ev ** 2 * energy ** 2))


def cody_lorentz_energy_eps2(photon_energy_ev, amplitude_ev, center_ev, broadening_ev, gap_ev,
                             transition_ev, tail_onset_ev, urbach_ev):
    """E * eps2(E), finite at E = 0 (the Urbach tail's eps2 goes like 1/E there).

    Vectorized: parameters may be floats or (B, 1) arrays against energies (W,).
    """
    energy = np.asarray(photon_energy_ev, dtype=float)
    band = energy * cody_gap_factor(energy, gap_ev, transition_ev) * lorentz_factor(
        energy, amplitude_ev, center_ev, broadening_ev)
    onset = np.asarray(tail_onset_ev, dtype=float)
    has_tail = onset > 0
    # E1 = Et G(Et) L(Et); the tail is E eps2 = E1 exp((E - Et) / Eu)
    e1 = onset * cody_gap_factor(onset, gap_ev, transition_ev) * lorentz_factor(
        onset, amplitude_ev, center_ev, broadening_ev)
    # the exponent is <= 0 where the tail is used; clip it elsewhere so exp never overflows
    exponent = np.minimum((energy - onset) / urbach_ev, 0.0)
    tail = np.where(has_tail, e1 * np.exp(exponent), 0.0)
    return np.where(energy > onset, band, tail)


def cody_lorentz_eps2(photon_energy_ev, amplitude_ev, center_ev, broadening_ev, gap_ev,
                      transition_ev, tail_onset_ev, urbach_ev):
    """eps2(E) of the Cody-Lorentz law (module docstring) for E > 0."""
    energy = np.asarray(photon_energy_ev, dtype=float)
    product = cody_lorentz_energy_eps2(energy, amplitude_ev, center_ev, broadening_ev, gap_ev,
                                       transition_ev, tail_onset_ev, urbach_ev)
    return product / np.where(energy > 0, energy, 1.0)


# -- numerical Kramers-Kronig transform ---------------------------------------------

@functools.lru_cache(maxsize=16)
def integration_grid(tail_step_ev: float, tail_end_ev: float, step_ev: float, dense_end_ev: float,
                     grid_end_ev: float = GRID_END_EV) -> np.ndarray:
    """Nodes from 0 to `grid_end_ev`: step `tail_step_ev` up to `tail_end_ev` (the Urbach tail
    needs the finer step), `step_ev` up to `dense_end_ev`, then growing with E.

    The step never grows by more than STEP_GROWTH from one node to the next
    (the two halves of a quadratic panel stay nearly equal, which keeps the rule
    accurate), and the node count is odd: the grid splits into panels of two steps.
    """
    nodes = [0.0]
    step = tail_step_ev
    # a plain loop, but cached: it runs once per grid, not per evaluation
    while nodes[-1] < grid_end_ev:
        here = nodes[-1]
        wanted = tail_step_ev if here < tail_end_ev else step_ev if here < dense_end_ev \
            else MAX_RELATIVE_STEP * here
        step = min(wanted, step * STEP_GROWTH)
        nodes.append(here + step)
    if len(nodes) % 2 == 0:
        nodes.append(nodes[-1] + step)
    grid = np.array(nodes)
    grid.flags.writeable = False      # shared by the cache
    return grid


def _antiderivatives(x, energy):
    """R(x), P(x): antiderivatives of 1 / (x^2 - E^2) and x / (x^2 - E^2) (x >= 0, E > 0).

    R = ln|(x - E) / (x + E)| / 2E and P = ln|x^2 - E^2| / 2; ln|x - E| is
    clipped at x = E: there the pieces on both sides carry the same singular
    term with opposite signs (the integrand is continuous), so it cancels.
    """
    log_minus = np.log(np.maximum(np.abs(x - energy), 1e-300))
    log_plus = np.log(x + energy)
    return (log_minus - log_plus) / (2.0 * energy), 0.5 * (log_minus + log_plus)


def _panel_weights(left, middle, right, ratio, product, energy):
    """Weights of f(left), f(middle), f(right) in P int_left^right q(x) / (x^2 - E^2) dx, q the
    quadratic through the three points.

    `ratio`, `product`: `_antiderivatives` at (left, right).  With t = x - middle
    the moments int t^n / (x^2 - E^2) dx (n = 0, 1, 2) are closed-form and the
    Lagrange basis turns them into weights.  Arrays broadcast.
    """
    i0 = ratio[1] - ratio[0]           # int 1 / (x^2 - E^2)
    i1 = product[1] - product[0]       # int x / (x^2 - E^2)
    m1 = i1 - middle * i0
    m2 = (right - left) + (energy ** 2 + middle ** 2) * i0 - 2.0 * middle * i1   # x^2 = (x^2 - E^2) + E^2
    t0, t2 = left - middle, right - middle
    return ((m2 - t2 * m1) / (t0 * (t0 - t2)),
            (m2 - (t0 + t2) * m1 + t0 * t2 * i0) / (t0 * t2),
            (m2 - t0 * m1) / (t2 * (t2 - t0)))


def kramers_kronig_weights(nodes: np.ndarray, photon_energy_ev: np.ndarray) -> np.ndarray:
    """Matrix Wt (W, M) with P int_0^end f(x) / (x^2 - E^2) dx ~ Wt @ f(nodes).

    f is taken piecewise quadratic over panels of two grid steps and each panel
    is integrated against the kernel exactly (a product-integration rule), so
    the principal value needs no special care.  The node count must be odd.
    """
    energy = np.maximum(np.asarray(photon_energy_ev, dtype=float), 1e-9)[:, None]
    ratio, product = _antiderivatives(nodes[None, :], energy)
    ends = (slice(0, -1, 2), slice(2, None, 2))
    w_left, w_middle, w_right = _panel_weights(
        nodes[ends[0]], nodes[1::2], nodes[ends[1]],
        (ratio[:, ends[0]], ratio[:, ends[1]]), (product[:, ends[0]], product[:, ends[1]]), energy)
    weights = np.zeros((energy.shape[0], nodes.size))
    weights[:, ends[0]] += w_left
    weights[:, 1::2] += w_middle
    weights[:, ends[1]] += w_right
    return weights


def _kink_correction(nodes, energy, args):
    """Exact-for-quadratics fix of the one grid panel holding the kink of E eps2.

    E eps2 is continuous but its slope jumps at Et (the Urbach slope is set by
    Eu) or, without a tail, its curvature jumps at Eg; the panel's single
    quadratic would smear that.  The panel is re-integrated as two quadratics
    meeting at the kink, and the difference is returned ((B, W) or (W,)).
    """
    gap, onset = np.asarray(args[3], dtype=float), np.asarray(args[5], dtype=float)
    kink = np.where(onset > gap, onset, gap)
    panel = np.clip((np.searchsorted(nodes, kink, side="right") - 1) // 2, 0, (nodes.size - 3) // 2)
    left, middle, right = nodes[2 * panel], nodes[2 * panel + 1], nodes[2 * panel + 2]
    # a kink within round-off of a panel end sits on it (no sliver sub-panel, whose ends
    # would no longer match the neighbours' at a clipped singularity)
    kink = np.where(np.abs(kink - left) < 1e-9, left, np.where(np.abs(kink - right) < 1e-9, right, kink))
    # three panels at once: the grid's, and the two halves meeting at the kink
    # (3,) -> (3, 1) against energies (W,); batched (any parameter (B, 1)) -> (3, B, 1)
    batch_shape = np.broadcast_shapes(*(np.shape(a) for a in args))
    shape = (3,) + (batch_shape if batch_shape else (1,))
    left, middle, right, kink = np.broadcast_arrays(left, middle, right, kink, np.empty(batch_shape))[:4]
    lo = np.stack(np.broadcast_arrays(left, left, kink)).reshape(shape)
    hi = np.stack(np.broadcast_arrays(right, kink, right)).reshape(shape)
    width = hi - lo
    hi = np.where(width > 0, hi, lo + 1.0)           # empty halves: any finite panel, weight 0 below
    mid = np.stack(np.broadcast_arrays(middle, 0.5 * (left + kink), 0.5 * (kink + right))).reshape(shape)
    mid = np.where(width > 0, mid, 0.5 * (lo + hi))
    values = cody_lorentz_energy_eps2(np.stack([lo, mid, hi]), *args)
    r_lo, p_lo = _antiderivatives(lo, energy)
    r_hi, p_hi = _antiderivatives(hi, energy)
    w_lo, w_mid, w_hi = _panel_weights(lo, mid, hi, (r_lo, r_hi), (p_lo, p_hi), energy)
    integrals = np.where(width > 0, w_lo * values[0] + w_mid * values[1] + w_hi * values[2], 0.0)
    return integrals[1] + integrals[2] - integrals[0]


_WEIGHT_CACHE: "OrderedDict[tuple, tuple]" = OrderedDict()
_WEIGHT_CACHE_SIZE = 4


def _cached_weights(grid: tuple, energy: np.ndarray):
    """(nodes, weights (M, W)) for a grid and energies; a fit re-uses the same ones every call."""
    key = (grid, energy.shape, energy.tobytes())
    if key in _WEIGHT_CACHE:
        _WEIGHT_CACHE.move_to_end(key)
        return _WEIGHT_CACHE[key]
    nodes = integration_grid(*grid)
    # stored (M, W) and contiguous: the hot path is (B, M) @ (M, W)
    entry = (nodes, np.ascontiguousarray(kramers_kronig_weights(nodes, energy).T))
    _WEIGHT_CACHE[key] = entry
    while len(_WEIGHT_CACHE) > _WEIGHT_CACHE_SIZE:
        _WEIGHT_CACHE.popitem(last=False)
    return entry


def _ladder_step(finest_needed: float) -> float:
    """Largest MAX_STEP_EV / 2^n not above `finest_needed`, but not below MIN_STEP_EV."""
    step = MAX_STEP_EV
    while step > finest_needed and step / 2.0 >= MIN_STEP_EV:
        step /= 2.0
    return step


def _grid_for(energy, amplitude_ev, center_ev, broadening_ev, gap_ev, transition_ev, tail_onset_ev,
              urbach_ev):
    """Grid (tail step, tail end, step, dense end, grid end) on ladders (powers of 2, whole eV)
    so fits hit the cache.

    The fine steps cover the features of eps2 only (tail, onset, peak); beyond,
    E' eps2 is smooth and the growing steps suffice, wherever the energies lie.
    """
    step = _ladder_step(min(float(np.min(broadening_ev)) / STEPS_PER_BROADENING,
                            float(np.min(transition_ev)) / STEPS_PER_TRANSITION))
    onset = np.asarray(tail_onset_ev, dtype=float)
    if np.any(onset > 0):
        tail_step = min(step, _ladder_step(float(np.min(urbach_ev)) / STEPS_PER_URBACH))
        tail_end = float(math.ceil(float(np.max(onset)) + 0.5))
    else:
        tail_step, tail_end = step, 0.0
    reach = max(float(np.max(np.asarray(center_ev) + 4.0 * np.asarray(broadening_ev))),
                float(np.max(np.asarray(gap_ev) + 4.0 * np.asarray(transition_ev))),
                tail_end + 1.0)
    # the asymptotic tail beyond the grid end assumes E well below it
    grid_end = max(GRID_END_EV, 2.0 ** math.ceil(math.log2(20.0 * float(np.max(energy, initial=1.0)))))
    return tail_step, tail_end, step, float(math.ceil(reach)), grid_end


def kramers_kronig_eps1(photon_energy_ev, amplitude_ev, center_ev, broadening_ev, gap_ev,
                        transition_ev, tail_onset_ev, urbach_ev):
    """eps1 - eps_inf = (2 / pi) P int_0^inf E' eps2(E') / (E'^2 - E^2) dE' for the Cody-Lorentz eps2.

    Batch-vectorized: E' eps2 is sampled on one grid for all batch members and
    (B, M) @ (M, W) does the integral; see the module docstring for the method.
    """
    args = (amplitude_ev, center_ev, broadening_ev, gap_ev, transition_ev, tail_onset_ev, urbach_ev)
    energy = np.asarray(photon_energy_ev, dtype=float)
    flat = energy.ravel()
    nodes, weights = _cached_weights(_grid_for(flat, *args), flat)
    integral = cody_lorentz_energy_eps2(nodes, *args) @ weights
    integral = integral + _kink_correction(nodes, np.maximum(flat, 1e-9), args)
    # beyond the grid G -> 1 and eps2 -> A E0 Gamma / E'^3:
    # int_end^inf E'^-2 / (E'^2 - E^2) dE' = 1 / (3 end^3) + E^2 / (5 end^5) + ...
    end = nodes[-1]
    beyond = np.asarray(amplitude_ev * center_ev * broadening_ev) * (
        1.0 / (3.0 * end ** 3) + flat ** 2 / (5.0 * end ** 5))
    eps1 = (2.0 / math.pi) * (integral + beyond)
    return eps1.reshape(np.shape(eps1)[:-1] + energy.shape)


def cody_lorentz_susceptibility(photon_energy_ev, amplitude_ev, center_ev, broadening_ev, gap_ev,
                                transition_ev, tail_onset_ev, urbach_ev):
    """eps - eps_inf of the Cody-Lorentz law (numerical eps1, closed-form eps2)."""
    args = (amplitude_ev, center_ev, broadening_ev, gap_ev, transition_ev, tail_onset_ev, urbach_ev)
    return kramers_kronig_eps1(photon_energy_ev, *args) + 1j * cody_lorentz_eps2(photon_energy_ev, *args)


# -- the law --------------------------------------------------------------------------

class CodyLorentz(Dispersion):
    """Cody-Lorentz law (Ferlauto et al. 2002) with an optional Urbach tail."""

    law = "cody_lorentz"
    SPECS = {
        "eps_inf": ParamSpec("eps_inf", "", -math.inf, math.inf, "high-frequency dielectric constant"),
        "amplitude_ev": ParamSpec("amplitude_ev", "eV", 0.0, math.inf, "oscillator amplitude A"),
        "center_ev": ParamSpec("center_ev", "eV", 1e-6, math.inf, "Lorentz peak-transition energy E0"),
        "broadening_ev": ParamSpec("broadening_ev", "eV", 1e-6, math.inf, "Lorentz broadening Gamma"),
        "gap_ev": ParamSpec("gap_ev", "eV", 0.0, math.inf, "Cody optical gap Eg"),
        "transition_ev": ParamSpec("transition_ev", "eV", 1e-6, math.inf,
                                   "Ep: width above Eg of the Cody-to-Lorentz onset"),
        "tail_onset_ev": ParamSpec("tail_onset_ev", "eV", 0.0, math.inf,
                                   "Et: start of the Urbach tail (0 = no tail, else >= gap_ev)"),
        "urbach_ev": ParamSpec("urbach_ev", "eV", 1e-6, math.inf, "Urbach energy Eu of the tail"),
    }
    ARGUMENTS = ("amplitude_ev", "center_ev", "broadening_ev", "gap_ev", "transition_ev",
                 "tail_onset_ev", "urbach_ev")

    def __init__(self, eps_inf, amplitude_ev, center_ev, broadening_ev, gap_ev, transition_ev,
                 tail_onset_ev=0.0, urbach_ev=DEFAULT_URBACH_EV, **meta):
        raw = dict(eps_inf=eps_inf, amplitude_ev=amplitude_ev, center_ev=center_ev,
                   broadening_ev=broadening_ev, gap_ev=gap_ev, transition_ev=transition_ev,
                   tail_onset_ev=tail_onset_ev, urbach_ev=urbach_ev)
        params = {key: as_param(raw[key], spec, key) for key, spec in self.SPECS.items()}
        super().__init__(params, self.SPECS, **meta)
        onset, gap = self.params["tail_onset_ev"].value, self.params["gap_ev"].value
        if 0.0 < onset < gap:
            raise LaminaInputError(f"tail_onset_ev = {onset:g} lies below gap_ev = {gap:g}", "tail_onset_ev",
                                   "0 (no Urbach tail) or a value >= gap_ev")

    def _susceptibility(self, photon_energy_ev, p):
        """epsilon - eps_inf (the hook composite laws add up)."""
        for name in self.ARGUMENTS:
            # the integration grid is sized from the values: they must be numbers
            if not np.all(np.isfinite(p[name])):
                raise LaminaInputError(f"{name} is not a finite number", name, "finite parameter values")
        return cody_lorentz_susceptibility(photon_energy_ev, *(p[name] for name in self.ARGUMENTS))

    def _epsilon(self, photon_energy_ev, p):
        return p["eps_inf"] + self._susceptibility(photon_energy_ev, p)

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", *cls.SPECS}, where)
        params = read_params(table, cls.SPECS, where,
                             defaults={"tail_onset_ev": 0.0, "urbach_ev": DEFAULT_URBACH_EV})
        if params["tail_onset_ev"].value > 0 and "urbach_ev" not in table:
            raise LaminaInputError("an Urbach tail (tail_onset_ev > 0) needs urbach_ev", where,
                                   "an 'urbach_ev' entry")
        try:
            return cls(**params)
        except LaminaInputError as err:
            raise LaminaInputError(err.problem, f"{where}.{err.where}" if err.where else where,
                                   err.expected) from None

    def to_toml(self):
        return {"law": self.law, **{key: prm.to_toml() for key, prm in self.params.items()}}
