"""Dispersion laws: complex epsilon as a function of photon energy.

One module per family of laws; each has pure vectorized functions (formula and
source in the docstring) and a thin `Dispersion` subclass with named
parameters.  `LAWS` maps the model-file law name to its class; `from_toml`
builds a law from a model-file table.
"""
from __future__ import annotations

from typing import Mapping

from ..errors import LaminaInputError
from .base import Dispersion, Resolver
from .constant import Constant
from .cauchy import Cauchy
from .sellmeier import Sellmeier
from .lorentz import Lorentz
from .drude import Drude
from .composite import Sum
from .tabulated import Table
from .ema import Bruggeman, MaxwellGarnett
from .tauc_lorentz import TaucLorentz
from .gaussian import Gaussian
from .cody_lorentz import CodyLorentz

LAWS: dict[str, type[Dispersion]] = {}


def register(cls: type[Dispersion]) -> type[Dispersion]:
    LAWS[cls.law] = cls
    return cls


register(Constant)
register(Cauchy)
register(Sellmeier)
register(Lorentz)
register(Drude)
register(Sum)
register(Table)
register(Bruggeman)
register(MaxwellGarnett)
register(TaucLorentz)
register(Gaussian)
register(CodyLorentz)


def from_toml(table: Mapping, where: str, resolve: Resolver | None = None) -> Dispersion:
    """Build a law from a model-file table with a ``law`` key."""
    if not isinstance(table, Mapping):
        raise LaminaInputError(f"{table!r} is not a table", where, "a table with a 'law' key")
    law = table.get("law")
    if law is None:
        raise LaminaInputError("missing key 'law'", where, "law = one of " + ", ".join(sorted(LAWS)))
    if law not in LAWS:
        raise LaminaInputError(f"unknown law '{law}'", f"{where}.law", "one of " + ", ".join(sorted(LAWS)))
    return LAWS[law].from_toml(table, where, resolve)


__all__ = ["Dispersion", "LAWS", "register", "from_toml", "Constant", "Cauchy", "Sellmeier", "Lorentz",
           "Drude", "Sum", "Table", "Bruggeman", "MaxwellGarnett"]
