"""Effective-medium mixtures: Bruggeman and Maxwell Garnett.

Both treat a film as a fine-grained mixture of components (much smaller than the
wavelength) with spherical grains, and give one effective epsilon.

Bruggeman (D. A. G. Bruggeman, Ann. Phys. 416, 636 (1935); D. E. Aspnes,
Thin Solid Films 89, 249 (1982)): every component is embedded in the effective
medium itself, symmetric in the components:

    sum_i f_i (eps_i - eps) / (eps_i + 2 eps) = 0

Two components give a quadratic, solved in closed form,
2 eps^2 - b eps - eps_1 eps_2 = 0 with b = (3 f_1 - 1) eps_1 + (3 f_2 - 1) eps_2;
more components give a polynomial of degree n, solved for all wavelengths at
once by a vectorized simultaneous root iteration (companion-matrix eigenvalues
where it does not settle).  Of the roots the physical one
is taken: the largest Im(eps) (a passive mixture absorbs, Im(eps) >= 0) and,
among roots tied on that, the one nearest the volume-weighted mean of the
components (the root continuous with the pure components as a fraction goes
to 0 or 1; the spurious roots sit near the poles eps = -eps_i / 2).

Maxwell Garnett (J. C. Maxwell Garnett, Phil. Trans. R. Soc. A 203, 385
(1904); Aspnes 1982): inclusions embedded in a host,

    (eps - eps_h) / (eps + 2 eps_h) = sum_i f_i (eps_i - eps_h) / (eps_i + 2 eps_h)

explicit in eps; meant for dilute inclusions (it is not symmetric).

Model file (both laws):

    law = "bruggeman"
    components = [{material = "SiO2"}, {material = "void"}]
    fractions = [0.5]

``fractions`` lists the volume fractions of all components but the last
(``fractions.j`` belongs to ``components.j``); the last component takes the
rest, 1 - sum.  For ``maxwell_garnett`` the last component is the host, the
others are the inclusions.  Each fraction must lie in [0, 1] and their sum may
not exceed 1.  Component materials come from the `resolve(raw, where)` callable
of `from_toml` (a library name or an inline law table); their own parameters are
named ``components.<i>.material.<name>``.  Typical uses: surface roughness (film
+ void, 50 % each) and mixed or porous films.
"""
from __future__ import annotations

import math
from typing import Mapping, Sequence

import numpy as np

from ..errors import LaminaInputError
from ..parameters import ParamSpec, as_param
from .base import Dispersion, check_keys, require
from .composite import intersect_ranges

FRACTION_SPEC = ParamSpec("fraction", "", 0.0, 1.0, "volume fraction of a component")

#: slack on the fraction sum (round-off of values that add to exactly 1)
FRACTION_SLACK = 1e-9


# -- pure functions ---------------------------------------------------------------

def _pick_physical_root(roots, linear_mean):
    """Choose among candidate roots (last axis): largest Im, then nearest the linear mean.

    Roots whose Im lies within a small tolerance of the largest count as tied
    (lossless mixtures have all roots real).
    """
    scale = np.maximum(np.abs(linear_mean), 1.0)[..., None]
    imag = roots.imag
    tied = imag >= imag.max(axis=-1, keepdims=True) - 1e-9 * scale
    distance = np.where(tied, np.abs(roots - linear_mean[..., None]), np.inf)
    best = np.argmin(distance, axis=-1)
    return np.take_along_axis(roots, best[..., None], axis=-1)[..., 0]


def bruggeman_two(eps_a, eps_b, fraction_a):
    """Bruggeman eps of two components, closed form (Aspnes 1982).

    2 eps^2 - b eps - eps_a eps_b = 0, b = (3 f_a - 1) eps_a + (3 f_b - 1) eps_b,
    eps = (b +- sqrt(b^2 + 8 eps_a eps_b)) / 4, physical root as in the module doc.
    """
    eps_a, eps_b = np.asarray(eps_a, dtype=complex), np.asarray(eps_b, dtype=complex)
    f_a = np.asarray(fraction_a, dtype=float)
    f_b = 1.0 - f_a
    b = (3.0 * f_a - 1.0) * eps_a + (3.0 * f_b - 1.0) * eps_b
    root = np.sqrt(b * b + 8.0 * eps_a * eps_b)
    roots = np.stack(np.broadcast_arrays((b + root) / 4.0, (b - root) / 4.0), axis=-1)
    return _pick_physical_root(roots, np.broadcast_to(f_a * eps_a + f_b * eps_b, roots.shape[:-1]))


def _polymul(a, b):
    """Product of polynomials with coefficients on the last axis (lowest degree first)."""
    out = np.zeros(np.broadcast_shapes(a.shape[:-1], b.shape[:-1]) + (a.shape[-1] + b.shape[-1] - 1,),
                   dtype=complex)
    for i in range(a.shape[-1]):
        out[..., i:i + b.shape[-1]] += a[..., i:i + 1] * b
    return out


def _companion_roots(monic):
    """Roots of monic polynomials (coefficients lowest degree first, leading 1 omitted)."""
    degree = monic.shape[-1]
    companion = np.zeros(monic.shape[:-1] + (degree, degree), dtype=complex)
    companion[..., np.arange(1, degree), np.arange(degree - 1)] = 1.0
    companion[..., :, -1] = -monic
    return np.linalg.eigvals(companion)


def _horner(z, coeffs):
    """Value and slope of polynomials (coefficients lowest first, last axis) at points z (..., n)."""
    value = np.broadcast_to(coeffs[..., -1:], z.shape).astype(complex)
    slope = np.zeros_like(value)
    for k in range(coeffs.shape[-1] - 2, -1, -1):
        slope = slope * z + value
        value = value * z + coeffs[..., k:k + 1]
    return value, slope


def _aberth_step(z, coeffs):
    """One Aberth-Ehrlich update of all root estimates z (..., n)."""
    value, slope = _horner(z, coeffs)
    ratio = value / np.where(slope == 0, 1e-300, slope)
    repulsion = np.zeros_like(z)
    for j in range(z.shape[-1]):
        diff = z - z[..., j:j + 1]
        diff[..., j] = 1.0
        inverse = 1.0 / diff
        inverse[..., j] = 0.0
        repulsion = repulsion + inverse
    step = ratio / (1.0 - ratio * repulsion)
    return np.where(np.isfinite(step), step, 0.0)


def polynomial_roots(monic, max_iterations: int = 60, initial=None):
    """All roots of many monic polynomials at once (coefficients lowest degree first).

    Aberth-Ehrlich simultaneous iteration (O. Aberth, Math. Comp. 27, 339 (1973)),
    vectorized: each sweep updates every polynomial not yet settled (no Python
    loop over polynomials); cubically convergent for simple roots.  Polynomials
    it does not settle (clustered or multiple roots) are solved again as
    companion-matrix eigenvalues (numpy.linalg.eigvals), exact but slower.
    `initial` (same shape as the roots) may hold good first guesses.
    """
    degree = monic.shape[-1]
    shape = monic.shape[:-1]
    flat = monic.reshape(-1, degree)
    coeffs = np.concatenate([flat, np.ones((flat.shape[0], 1), dtype=complex)], axis=-1)
    radius = 1.0 + np.abs(flat).max(axis=-1, keepdims=True)          # Cauchy's bound on |root|
    if initial is None:
        z = 0.5 * radius * np.exp(1j * (2 * np.pi * np.arange(degree) / degree + 0.4))
    else:
        z = np.array(initial, dtype=complex).reshape(-1, degree)
    active = np.arange(flat.shape[0])
    for _ in range(max_iterations):
        step = _aberth_step(z[active], coeffs[active])
        z[active] -= step
        moving = np.any(np.abs(step) > 1e-14 * radius[active], axis=-1)
        active = active[moving]
        if active.size == 0:
            break
    # check: each root must make its polynomial vanish relative to the size of its terms
    value, _ = _horner(z, coeffs)
    size, _ = _horner(np.abs(z) + 0j, np.abs(coeffs) + 0j)
    gaps = np.where(np.eye(degree, dtype=bool), np.inf, np.abs(z[:, :, None] - z[:, None, :]))
    settled = np.all(np.abs(value) <= 1e-10 * size.real, axis=-1) & (gaps.min(axis=(-2, -1)) > 1e-6 * radius[:, 0])
    if not np.all(settled):
        z[~settled] = _companion_roots(flat[~settled])
    return z.reshape(shape + (degree,))


def bruggeman_many(eps_list: Sequence, fractions: Sequence):
    """Bruggeman eps of n components (fractions sum to 1), all wavelengths at once.

    Multiplying sum_i f_i (eps_i - eps) / (eps_i + 2 eps) = 0 by prod_j (eps_j + 2 eps)
    gives a polynomial of degree n in eps, solved for all wavelengths at once
    (`polynomial_roots`, no loop over wavelengths).  Physical root: as in the module doc.
    """
    eps_arrays = np.broadcast_arrays(*[np.asarray(e, dtype=complex) for e in eps_list],
                                     *[np.asarray(f, dtype=float) for f in fractions])
    count = len(eps_list)
    eps_arrays, frac_arrays = eps_arrays[:count], eps_arrays[count:]
    shape = eps_arrays[0].shape
    poly = np.zeros(shape + (count + 1,), dtype=complex)
    for i in range(count):
        term = np.stack([frac_arrays[i] * eps_arrays[i], -frac_arrays[i] + 0j], axis=-1)  # f_i (eps_i - x)
        for j in range(count):
            if j != i:
                term = _polymul(term, np.stack([eps_arrays[j], np.full(shape, 2.0 + 0j)], axis=-1))
        poly = poly + term
    # leading coefficient: -sum_i f_i 2^(n-1) = -2^(n-1) (never zero when fractions sum to 1)
    monic = poly[..., :-1] / poly[..., -1:]
    roots = polynomial_roots(monic)
    linear_mean = sum(f * e for f, e in zip(frac_arrays, eps_arrays))
    return _pick_physical_root(roots, linear_mean)


def bruggeman_epsilon(eps_list: Sequence, fractions: Sequence):
    """Bruggeman effective eps; closed form for two components, companion roots for more."""
    if len(eps_list) == 1:
        return np.asarray(eps_list[0], dtype=complex)
    if len(eps_list) == 2:
        return bruggeman_two(eps_list[0], eps_list[1], fractions[0])
    return bruggeman_many(eps_list, fractions)


def maxwell_garnett_epsilon(eps_host, eps_inclusions: Sequence, inclusion_fractions: Sequence):
    """Maxwell Garnett eps = eps_h (1 + 2 S) / (1 - S), S = sum_i f_i (eps_i - eps_h) / (eps_i + 2 eps_h).

    (Maxwell Garnett 1904; Aspnes 1982.)  Host fraction 1 - sum f_i.
    """
    eps_host = np.asarray(eps_host, dtype=complex)
    s = 0.0
    for eps_i, f_i in zip(eps_inclusions, inclusion_fractions):
        s = s + f_i * (eps_i - eps_host) / (eps_i + 2.0 * eps_host)
    return eps_host * (1.0 + 2.0 * s) / (1.0 - s)


# -- the laws -------------------------------------------------------------------------

def _fraction_key(index: int) -> str:
    return f"fractions.{index}"


def _component_prefix(index: int) -> str:
    return f"components.{index}.material."


class _Mixture(Dispersion):
    """Shared machinery: components (laws), free fractions, last component takes the rest."""

    BACKGROUND = None
    SPECS: dict = {}

    def __init__(self, components: Sequence[Dispersion], fractions: Sequence, *,
                 component_refs: Sequence | None = None, **meta):
        components = list(components)
        if len(components) < 2:
            raise LaminaInputError(f"{len(components)} component(s)", "components", "at least two components")
        fractions = list(fractions)
        if len(fractions) != len(components) - 1:
            raise LaminaInputError(f"{len(fractions)} fractions for {len(components)} components", "fractions",
                                   f"{len(components) - 1} fractions (one per component but the last, "
                                   "which takes the rest)")
        self.components = components
        #: what the model file said for each material (a library name or None = inline law)
        self.component_refs = list(component_refs) if component_refs is not None else [None] * len(components)
        self._ref_params = [dict(c.params) for c in components]
        params, specs = {}, {}
        for index, raw in enumerate(fractions, start=1):
            spec = ParamSpec(_fraction_key(index), "", 0.0, 1.0, f"volume fraction of components.{index}")
            params[_fraction_key(index)] = as_param(raw, spec, _fraction_key(index))
            specs[_fraction_key(index)] = spec
        for index, comp in enumerate(components, start=1):
            for local, prm in comp.params.items():
                params[_component_prefix(index) + local] = prm
                specs[_component_prefix(index) + local] = comp.specs[local]
        meta.setdefault("valid_range_nm", intersect_ranges(c.valid_range_nm for c in components))
        super().__init__(params, specs, **meta)
        self._fraction_values({k: prm.value for k, prm in self.params.items()})

    def _fraction_values(self, p: Mapping) -> list:
        """All fractions (the last = 1 - sum of the others); LaminaInputError when out of [0, 1]."""
        free = [p[_fraction_key(i)] for i in range(1, len(self.components))]
        for index, value in enumerate(free, start=1):
            arr = np.asarray(value, dtype=float)
            if np.any(~np.isfinite(arr)) or np.any(arr < 0.0) or np.any(arr > 1.0):
                bad = float(np.ravel(arr)[np.flatnonzero(~((arr >= 0) & (arr <= 1)))[0]])
                raise LaminaInputError(f"fractions.{index} = {bad:g} is outside [0, 1]", _fraction_key(index),
                                       "a volume fraction between 0 and 1")
        rest = 1.0 - sum(free)
        if np.any(np.asarray(rest) < -FRACTION_SLACK):
            total = float(np.max(1.0 - np.asarray(rest)))
            raise LaminaInputError(f"the fractions add up to {total:g}", "fractions",
                                   "fractions that add up to at most 1 (the last component takes the rest)")
        return free + [np.clip(rest, 0.0, 1.0)]

    def _component_eps(self, photon_energy_ev, p: Mapping) -> list:
        out = []
        for index, comp in enumerate(self.components, start=1):
            prefix = _component_prefix(index)
            sub = {key[len(prefix):]: val for key, val in p.items() if key.startswith(prefix)}
            out.append(np.asarray(comp._epsilon(photon_energy_ev, sub), dtype=complex))
        return out

    def _synced_component(self, index: int) -> Dispersion:
        prefix = _component_prefix(index)
        own = {key[len(prefix):]: prm for key, prm in self.params.items() if key.startswith(prefix)}
        comp = self.components[index - 1]
        return comp.with_params(own) if own else comp

    def copy(self):
        new = super().copy()
        new.components = list(self.components)
        return new

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", "components", "fractions"}, where)
        raw_components = require(table, "components", where)
        if isinstance(raw_components, (str, Mapping)) or not isinstance(raw_components, Sequence) \
                or len(raw_components) < 2:
            raise LaminaInputError(f"{raw_components!r} is not a list of two or more components",
                                   f"{where}.components", '[{material = "SiO2"}, {material = "void"}]')
        components, refs = [], []
        for index, raw in enumerate(raw_components, start=1):
            comp_where = f"{where}.components.{index}"
            if not isinstance(raw, Mapping):
                raise LaminaInputError(f"{raw!r} is not a table", comp_where, '{material = "..."}')
            check_keys(raw, {"material"}, comp_where)
            material = require(raw, "material", comp_where)
            components.append(_resolve(material, f"{comp_where}.material", resolve))
            refs.append(material if isinstance(material, str) else None)
        raw_fractions = require(table, "fractions", where)
        if isinstance(raw_fractions, (str, Mapping)) or not isinstance(raw_fractions, Sequence):
            raise LaminaInputError(f"{raw_fractions!r} is not a list", f"{where}.fractions",
                                   f"a list of {len(components) - 1} volume fraction(s)")
        if len(raw_fractions) != len(components) - 1:
            raise LaminaInputError(f"{len(raw_fractions)} fractions for {len(components)} components",
                                   f"{where}.fractions", f"{len(components) - 1} fraction(s): one per component "
                                   "but the last, which takes the rest")
        fractions = [as_param(raw, FRACTION_SPEC, f"{where}.fractions.{i}")
                     for i, raw in enumerate(raw_fractions, start=1)]
        try:
            return cls(components, fractions, component_refs=refs)
        except LaminaInputError as err:
            raise LaminaInputError(err.problem, f"{where}.{err.where}" if err.where else where,
                                   err.expected) from None

    def to_toml(self):
        components = []
        for index, comp in enumerate(self.components, start=1):
            synced = self._synced_component(index)
            ref = self.component_refs[index - 1]
            # a library name stays a name as long as its parameters are untouched
            if ref is not None and synced.params == self._ref_params[index - 1]:
                components.append({"material": ref})
            else:
                components.append({"material": synced.to_toml()})
        fractions = [self.params[_fraction_key(i)].to_toml() for i in range(1, len(self.components))]
        return {"law": self.law, "components": components, "fractions": fractions}


def _resolve(material, where: str, resolve) -> Dispersion:
    """A component's law: through the caller's resolver, else an inline table only."""
    if resolve is not None:
        return resolve(material, where)
    if isinstance(material, Mapping):
        from . import from_toml
        return from_toml(material, where, None)
    raise LaminaInputError(f"cannot look up material {material!r} here (no material resolver)", where,
                           "an inline law table, or a model file loaded with lamina.load_model")


class Bruggeman(_Mixture):
    """Bruggeman mixture of two or more components (symmetric)."""

    law = "bruggeman"

    def _epsilon(self, photon_energy_ev, p):
        fractions = self._fraction_values(p)
        return bruggeman_epsilon(self._component_eps(photon_energy_ev, p), fractions)


class MaxwellGarnett(_Mixture):
    """Maxwell Garnett mixture: inclusions (all components but the last) in a host (the last)."""

    law = "maxwell_garnett"

    def _epsilon(self, photon_energy_ev, p):
        fractions = self._fraction_values(p)
        eps = self._component_eps(photon_energy_ev, p)
        return maxwell_garnett_epsilon(eps[-1], eps[:-1], fractions[:-1])
