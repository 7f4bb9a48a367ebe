"""The common shape of every dispersion law.

A law is a pure, vectorized function of photon energy (eV) returning complex
epsilon (module-level functions in each law's module), wrapped by a thin
`Dispersion` object that holds named parameters (`Param`, with units and
physical bounds from `ParamSpec`) and evaluates the function.

Parameter names are *local* dotted paths that mirror the law's table in a
model file, arrays by 1-based index: ``eps_inf``, ``oscillators.2.center_ev``,
``components.1.material.A``.  The stack prefixes them with the layer name.

Batching: ``epsilon_ev(E, values)`` takes optional overrides, a mapping from
local name to a float or an array of shape ``(B,)``; with any array the result
has shape ``(B, W)`` for ``W`` energies, otherwise ``(W,)``.  The optics engine
and the fitter rely on this to evaluate many parameter sets without a Python
loop.
"""
from __future__ import annotations

from typing import Callable, ClassVar, Mapping

import numpy as np

from ..errors import LaminaInputError
from ..parameters import Param, ParamSpec, as_param
from ..units import HC_EV_NM, nk_from_epsilon

#: resolve(raw, where) -> Dispersion: turns a model-file material value (a
#: library name or an inline law table) into a law; given by the caller so that
#: laws that contain other materials (effective-medium mixtures) need not know
#: the material library.
Resolver = Callable[[object, str], "Dispersion"]


class Dispersion:
    """Base class: named parameters plus a vectorized epsilon(E)."""

    #: the law's name in model files (``law = "..."``)
    law: ClassVar[str] = ""

    def __init__(self, params: Mapping[str, Param], specs: Mapping[str, ParamSpec], *,
                 name: str | None = None, source: str = "",
                 valid_range_nm: tuple[float, float] | None = None):
        self.params: dict[str, Param] = dict(params)
        self.specs: dict[str, ParamSpec] = dict(specs)
        missing = set(self.params) - set(self.specs)
        if missing:
            raise ValueError(f"parameters without spec: {sorted(missing)}")
        for key, prm in self.params.items():
            self.specs[key].check(prm.value, key)
        #: library name when the law came from the material library, else None
        self.name = name
        #: publication (and database page) the numbers come from
        self.source = source
        #: wavelength range (nm) where the law is valid; None = unlimited
        self.valid_range_nm = valid_range_nm

    # -- to be provided by each law -------------------------------------
    def _epsilon(self, photon_energy_ev: np.ndarray, p: Mapping[str, object]) -> np.ndarray:
        """Complex epsilon for parameter values `p` (floats or (B, 1) arrays)."""
        raise NotImplementedError

    def _susceptibility(self, photon_energy_ev: np.ndarray, p: Mapping[str, object]) -> np.ndarray:
        """Complex susceptibility chi(E) = epsilon - background (the law's ``eps_inf``, or 1).

        The hook through which a law becomes a term of the ``sum`` law
        (dispersion/composite.py): a term contributes chi only, its background
        parameter (named in ``BACKGROUND``) is left out.  Laws that cannot be a
        term (Cauchy, tables, constants) keep this default.
        """
        raise NotImplementedError(f"law '{self.law}' has no susceptibility")

    #: parameter that is the law's constant background (dropped when the law is
    #: a term of a ``sum``); None when the background is the vacuum's 1
    BACKGROUND: ClassVar[str | None] = "eps_inf"

    @classmethod
    def has_susceptibility(cls) -> bool:
        """True when the law implements `_susceptibility` (may be a term of a ``sum``)."""
        return cls._susceptibility is not Dispersion._susceptibility

    def susceptibility_ev(self, photon_energy_ev, values: Mapping[str, object] | None = None) -> np.ndarray:
        """Complex susceptibility epsilon - background at photon energies (eV); batched like epsilon_ev."""
        energy = np.asarray(photon_energy_ev, dtype=float)
        p, batched = self.param_values(values)
        chi = np.asarray(self._susceptibility(energy, p), dtype=complex)
        shape = ((max(np.shape(v)[0] for v in p.values() if np.ndim(v)),) if batched else ()) + energy.shape
        return np.broadcast_to(chi, shape) if chi.shape != shape else chi

    @classmethod
    def from_toml(cls, table: Mapping, where: str, resolve: Resolver | None = None) -> "Dispersion":
        """Build the law from its model-file table (``law`` key included)."""
        raise NotImplementedError

    def to_toml(self) -> dict:
        """The model-file table of this law (inverse of `from_toml`)."""
        raise NotImplementedError

    # -- shared machinery -------------------------------------------------
    def parameters(self) -> dict[str, Param]:
        """Local parameter names -> Param, in model-file order."""
        return dict(self.params)

    def param_values(self, values: Mapping[str, object] | None = None) -> tuple[dict, bool]:
        """Current values merged with overrides; arrays become (B, 1) columns."""
        p: dict[str, object] = {k: prm.value for k, prm in self.params.items()}
        batched = False
        if values:
            for key, val in values.items():
                if key not in p:
                    raise KeyError(f"{type(self).__name__} has no parameter '{key}'")
                arr = np.asarray(val, dtype=float)
                if arr.ndim == 0:
                    p[key] = float(arr)
                else:
                    p[key] = arr.reshape(-1, 1)
                    batched = True
        return p, batched

    def epsilon_ev(self, photon_energy_ev, values: Mapping[str, object] | None = None) -> np.ndarray:
        """Complex dielectric function at photon energies (eV); see module doc for batching."""
        energy = np.asarray(photon_energy_ev, dtype=float)
        p, batched = self.param_values(values)
        eps = np.asarray(self._epsilon(energy, p), dtype=complex)
        if batched:
            batch = max(np.shape(v)[0] for v in p.values() if np.ndim(v))
            eps = np.broadcast_to(eps, (batch,) + energy.shape)
        elif eps.shape != energy.shape:
            eps = np.broadcast_to(eps, energy.shape)
        return eps

    def epsilon(self, wavelength_nm, values: Mapping[str, object] | None = None) -> np.ndarray:
        """Complex dielectric function eps1 + i eps2 at wavelengths in nm."""
        wavelength_nm = np.asarray(wavelength_nm, dtype=float)
        self.check_range(wavelength_nm)
        return self.epsilon_ev(HC_EV_NM / wavelength_nm, values)

    def nk(self, wavelength_nm, values: Mapping[str, object] | None = None) -> np.ndarray:
        """Complex refractive index N = n + ik (k >= 0) at wavelengths in nm."""
        return nk_from_epsilon(self.epsilon(wavelength_nm, values))

    def check_range(self, wavelength_nm, where: str | None = None) -> None:
        """Raise LaminaInputError when a wavelength lies outside the valid range."""
        if self.valid_range_nm is None:
            return
        wl = np.asarray(wavelength_nm, dtype=float)
        if wl.size == 0:
            return
        lo, hi = self.valid_range_nm
        # a relative slack of 1e-9 forgives round-off at the table ends
        if wl.min() < lo * (1 - 1e-9) or wl.max() > hi * (1 + 1e-9):
            label = self.name or self.law
            raise LaminaInputError(
                f"wavelengths {wl.min():g}-{wl.max():g} nm reach outside the range of material '{label}'",
                where or f"material '{label}'",
                f"wavelengths within {lo:g}-{hi:g} nm",
            )

    def with_values(self, values: Mapping[str, float]) -> "Dispersion":
        """A copy with some parameter values replaced (bounds and flags kept)."""
        new = self.copy()
        for key, val in values.items():
            if key not in new.params:
                raise KeyError(f"{type(self).__name__} has no parameter '{key}'")
            new.params[key] = new.params[key].with_value(val)
        return new

    def with_params(self, params: Mapping[str, Param]) -> "Dispersion":
        """A copy with some Params replaced whole."""
        new = self.copy()
        for key, prm in params.items():
            if key not in new.params:
                raise KeyError(f"{type(self).__name__} has no parameter '{key}'")
            new.params[key] = prm
        return new

    def copy(self) -> "Dispersion":
        import copy as _copy
        new = _copy.copy(self)
        new.params = dict(self.params)
        return new

    def __repr__(self) -> str:
        label = f" '{self.name}'" if self.name else ""
        vals = ", ".join(f"{k}={p.value:g}" for k, p in list(self.params.items())[:6])
        return f"<{type(self).__name__}{label} {vals}>"


# -- helpers for from_toml implementations -------------------------------------

def check_keys(table: Mapping, allowed: set[str], where: str) -> None:
    """Raise a LaminaInputError naming the first unknown key of a model-file table."""
    for key in table:
        if key not in allowed:
            raise LaminaInputError(f"unknown key '{key}'", f"{where}.{key}",
                                   "one of " + ", ".join(sorted(allowed)))


def require(table: Mapping, key: str, where: str):
    if key not in table:
        raise LaminaInputError(f"missing key '{key}'", where, f"a '{key}' entry")
    return table[key]


def read_params(table: Mapping, specs: Mapping[str, ParamSpec], where: str,
                defaults: Mapping[str, float] | None = None, prefix: str = "") -> dict[str, Param]:
    """Params for `specs` from a model-file table; a key missing from the table takes its default."""
    params: dict[str, Param] = {}
    for key, spec in specs.items():
        local = key[len(prefix):] if prefix and key.startswith(prefix) else key
        if local in table:
            params[key] = as_param(table[local], spec, f"{where}.{local}")
        elif defaults is not None and local in defaults:
            params[key] = Param(float(defaults[local]), unit=spec.unit)
        else:
            raise LaminaInputError(f"missing parameter '{local}'", where, f"a value for '{local}'")
    return params


# -- helpers for laws with a list of parameter tables (oscillators, terms) -----

def list_key(list_name: str, index: int, name: str) -> str:
    """Local name of a list item's parameter, 1-based: ``oscillators.2.center_ev``."""
    return f"{list_name}.{index}.{name}"


def read_param_list(raw, list_name: str, item_specs: Mapping[str, ParamSpec], where: str,
                    defaults: Mapping[str, float] | None = None, allow_empty: bool = False
                    ) -> tuple[dict[str, Param], dict[str, ParamSpec]]:
    """Params and specs for a model-file list of tables, e.g. ``oscillators = [{...}, ...]``.

    `where` names the list itself (``film.material.oscillators``); items are
    reported as ``<where>.<i>`` (1-based).  Items may hold plain numbers, Param
    tables or Param objects.
    """
    expected = "a list of tables {" + ", ".join(item_specs) + "}"
    if isinstance(raw, (str, bytes, Mapping)) or not hasattr(raw, "__len__"):
        raise LaminaInputError(f"{raw!r} is not a list of tables", where, expected)
    if len(raw) == 0 and not allow_empty:
        raise LaminaInputError("the list is empty", where, "at least one entry: " + expected)
    params: dict[str, Param] = {}
    specs: dict[str, ParamSpec] = {}
    for index, item in enumerate(raw, start=1):
        item_where = f"{where}.{index}"
        if not isinstance(item, Mapping):
            raise LaminaInputError(f"{item!r} is not a table", item_where, expected)
        check_keys(item, set(item_specs), item_where)
        for name, spec in item_specs.items():
            key = list_key(list_name, index, name)
            if name in item:
                params[key] = as_param(item[name], spec, f"{item_where}.{name}")
            elif defaults is not None and name in defaults:
                params[key] = Param(float(defaults[name]), unit=spec.unit)
            else:
                raise LaminaInputError(f"missing parameter '{name}'", item_where, f"a value for '{name}'")
            specs[key] = spec
    return params, specs


def list_length(keys, list_name: str) -> int:
    """Number of items of list `list_name` among local parameter names."""
    prefix = list_name + "."
    return max((int(k[len(prefix):].split(".", 1)[0]) for k in keys if k.startswith(prefix)), default=0)


def list_values(p: Mapping[str, object], list_name: str, names) -> list[dict]:
    """Per-item values ``[{name: value}, ...]`` of a parameter list, from flat local names."""
    return [{name: p[list_key(list_name, i, name)] for name in names}
            for i in range(1, list_length(p, list_name) + 1)]


def list_to_toml(params: Mapping[str, Param], list_name: str, names) -> list[dict]:
    """The model-file list of tables for a parameter list (inverse of `read_param_list`)."""
    return [{name: params[list_key(list_name, i, name)].to_toml() for name in names}
            for i in range(1, list_length(params, list_name) + 1)]


def coerce_params(values: Mapping[str, object], specs: Mapping[str, ParamSpec], where: str = ""
                  ) -> dict[str, Param]:
    """Params from constructor arguments (numbers, Param tables or Params), checked against specs."""
    return {key: as_param(values[key], specs[key], f"{where}.{key}" if where else key) for key in specs}
