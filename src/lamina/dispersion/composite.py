"""The ``sum`` law: one background plus the susceptibilities of several laws.

    eps(E) = eps_inf + sum_t chi_t(E)

Each term is any registered law that has a susceptibility (`Dispersion.
has_susceptibility()`: lorentz, drude, sellmeier, tauc_lorentz, ...); it
contributes its epsilon minus its own background, so a term carries no
``eps_inf`` of its own: the one background is the ``sum``'s.  Because
susceptibilities of causal laws are causal, a sum of Kramers-Kronig consistent
terms is Kramers-Kronig consistent (linearity of the transform; Dressel and
Gruner, Electrodynamics of Solids, 2002).  Typical use: a transparent
conductor as Drude (free carriers) plus Lorentz (interband).

Model file (local names ``eps_inf``, ``terms.1.plasma_ev``,
``terms.2.oscillators.1.center_ev``, ...):

    law = "sum"
    eps_inf = 3.6
    terms = [
      {law = "drude", plasma_ev = 1.9, broadening_ev = 0.12},
      {law = "lorentz", oscillators = [{amplitude = 0.5, center_ev = 5.5, broadening_ev = 0.6}]},
    ]
"""
from __future__ import annotations

from typing import Mapping, Sequence

import numpy as np

from ..errors import LaminaInputError
from .base import Dispersion, check_keys, coerce_params, read_params, require
from .lorentz import EPS_INF_SPEC


def _term_prefix(index: int) -> str:
    return f"terms.{index}."


def intersect_ranges(ranges) -> tuple[float, float] | None:
    """Common wavelength range of several laws (None entries are unlimited)."""
    known = [r for r in ranges if r is not None]
    if not known:
        return None
    lo, hi = max(r[0] for r in known), min(r[1] for r in known)
    return (lo, hi)


def _background_value(term: Dispersion) -> dict:
    """The term's own background parameter (dropped from the sum) as {name: value}."""
    name = term.BACKGROUND
    return {name: term.params[name].value} if name and name in term.params else {}


class Sum(Dispersion):
    """eps_inf plus the susceptibilities of a list of term laws."""

    law = "sum"
    SPECS = {"eps_inf": EPS_INF_SPEC}

    def __init__(self, eps_inf=1.0, terms: Sequence[Dispersion] = (), **meta):
        terms = list(terms)
        if not terms:
            raise LaminaInputError("no terms", "terms", "at least one term law")
        for index, term in enumerate(terms, start=1):
            _check_term(term, f"terms.{index}")
        self.terms = terms
        params = coerce_params({"eps_inf": eps_inf}, self.SPECS)
        specs = dict(self.SPECS)
        for index, term in enumerate(terms, start=1):
            for local, prm in term.params.items():
                if local == term.BACKGROUND:
                    continue
                params[_term_prefix(index) + local] = prm
                specs[_term_prefix(index) + local] = term.specs[local]
        meta.setdefault("valid_range_nm", intersect_ranges(t.valid_range_nm for t in terms))
        super().__init__(params, specs, **meta)

    def _term_values(self, index: int, term: Dispersion, p: Mapping) -> dict:
        prefix = _term_prefix(index)
        sub = _background_value(term)
        sub.update({key[len(prefix):]: val for key, val in p.items() if key.startswith(prefix)})
        return sub

    def _susceptibility(self, photon_energy_ev, p):
        total = np.zeros(np.shape(photon_energy_ev), dtype=complex)
        for index, term in enumerate(self.terms, start=1):
            total = total + term._susceptibility(photon_energy_ev, self._term_values(index, term, p))
        return total

    def _epsilon(self, photon_energy_ev, p):
        return p["eps_inf"] + self._susceptibility(photon_energy_ev, p)

    def copy(self) -> "Sum":
        new = super().copy()
        new.terms = list(self.terms)
        return new

    def _synced_term(self, index: int, term: Dispersion) -> Dispersion:
        """The term with the sum's current Params written back (for to_toml after with_values)."""
        prefix = _term_prefix(index)
        own = {key[len(prefix):]: prm for key, prm in self.params.items() if key.startswith(prefix)}
        return term.with_params(own) if own else term.copy()

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", "eps_inf", "terms"}, where)
        params = read_params(table, cls.SPECS, where, defaults={"eps_inf": 1.0})
        raw_terms = require(table, "terms", where)
        if isinstance(raw_terms, (str, Mapping)) or not isinstance(raw_terms, Sequence) or not raw_terms:
            raise LaminaInputError(f"{raw_terms!r} is not a list of laws", f"{where}.terms",
                                   'a non-empty list of tables like {law = "lorentz", ...}')
        terms = [_term_from_toml(raw, f"{where}.terms.{i}", resolve) for i, raw in enumerate(raw_terms, start=1)]
        return cls(params["eps_inf"], terms)

    def to_toml(self):
        terms = []
        for index, term in enumerate(self.terms, start=1):
            table = self._synced_term(index, term).to_toml()
            if term.BACKGROUND:
                table.pop(term.BACKGROUND, None)
            terms.append(table)
        return {"law": self.law, "eps_inf": self.params["eps_inf"].to_toml(), "terms": terms}


def _check_term(term, where: str) -> None:
    """Raise unless `term` (a law or a law class) has a susceptibility."""
    is_law = isinstance(term, Dispersion) or (isinstance(term, type) and issubclass(term, Dispersion))
    if not is_law or not term.has_susceptibility():
        law = getattr(term, "law", repr(term))
        raise LaminaInputError(f"law '{law}' cannot be a term of a sum (it has no susceptibility)", where,
                               "a law with a susceptibility: lorentz, drude, sellmeier, tauc_lorentz, ...")


def _term_from_toml(raw, where: str, resolve) -> Dispersion:
    """One term: a law table without its own background (the sum holds the only eps_inf)."""
    from . import LAWS, from_toml
    if not isinstance(raw, Mapping):
        raise LaminaInputError(f"{raw!r} is not a table", where, 'a law table like {law = "drude", ...}')
    cls = LAWS.get(raw.get("law"))
    if cls is not None:
        _check_term(cls, where)
        if cls.BACKGROUND and cls.BACKGROUND in raw:
            raise LaminaInputError(f"a term carries no '{cls.BACKGROUND}' of its own", f"{where}.{cls.BACKGROUND}",
                                   f"'{cls.BACKGROUND}' only once, at the level of the sum")
        if cls.BACKGROUND and cls.BACKGROUND in getattr(cls, "SPECS", {}):
            # the term's own background is a placeholder, never used: chi excludes it
            raw = {**raw, cls.BACKGROUND: max(1.0, cls.SPECS[cls.BACKGROUND].lower)}
    return from_toml(raw, where, resolve)
