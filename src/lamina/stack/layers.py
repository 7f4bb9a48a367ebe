"""Layers and stacks: the optical model of a sample.

A `Stack` is ambient / thin layers (top to bottom) / substrate / optional exit
medium.  The substrate is semi-infinite unless it has a thickness in mm, in
which case it is a thick incoherent slab and the light leaves into `exit`
(air by default).

Full parameter names (used by results, specs, the command line) are the
model-file key paths joined by dots: ``oxide.thickness_nm``,
``film.material.eps_inf``, ``film.material.oscillators.1.center_ev``,
``substrate.material.A``, ``ambient.material.n``.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace
from typing import Mapping, NamedTuple

import numpy as np

from ..dispersion.base import Dispersion
from ..errors import LaminaInputError
from ..parameters import Param, ParamSpec

LAYER_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_-]*$")
RESERVED_NAMES = {"ambient", "substrate", "exit", "samples"}
THICKNESS_SPEC = ParamSpec("thickness_nm", "nm", 0.0, math.inf, "physical thickness", thickness_like=True)


@dataclass
class Layer:
    """One film: a name, a law for its optical constants, and a thickness Param (nm)."""

    name: str
    material: Dispersion
    thickness_nm: Param
    coherent: bool = True

    def __post_init__(self):
        if not isinstance(self.thickness_nm, Param):
            self.thickness_nm = Param(float(self.thickness_nm), unit="nm")
        THICKNESS_SPEC.check(self.thickness_nm.value, f"{self.name}.thickness_nm")


class OpticalInputs(NamedTuple):
    """What the transfer-matrix solver needs, for one or a batch of parameter sets.

    n_media: complex indices of every medium, ambient first, exit last; each
      (W,) or (B, W).
    thickness_nm: one per inner medium (len(n_media) - 2); float or (B,).
    coherent: one bool per inner medium.
    """

    n_media: list
    thickness_nm: list
    coherent: list


@dataclass
class Stack:
    """Ambient / layers / substrate [/ exit]; see module docstring."""

    layers: list[Layer]
    substrate: Dispersion
    ambient: Dispersion | None = None
    substrate_thickness_mm: float | None = None
    exit: Dispersion | None = None
    name: str = ""
    #: extra top-level model-file sections a higher layer understands (e.g. samples)
    extras: dict = field(default_factory=dict)

    def __post_init__(self):
        if self.ambient is None:
            from ..dispersion.constant import Constant
            self.ambient = Constant(1.0, 0.0, name="air", source="n = 1 (vacuum; air differs by ~3e-4)")
        seen = set()
        for layer in self.layers:
            if not LAYER_NAME.match(layer.name):
                raise LaminaInputError(f"layer name '{layer.name}' is not allowed", "layers.name",
                                       "letters, digits, _ and -, starting with a letter")
            if layer.name in RESERVED_NAMES:
                raise LaminaInputError(f"layer name '{layer.name}' is reserved", "layers.name",
                                       "a name other than " + ", ".join(sorted(RESERVED_NAMES)))
            if layer.name in seen:
                raise LaminaInputError(f"duplicate layer name '{layer.name}'", "layers.name", "unique layer names")
            seen.add(layer.name)
        if self.substrate_thickness_mm is not None and self.substrate_thickness_mm <= 0:
            raise LaminaInputError(f"thickness_mm = {self.substrate_thickness_mm} is not positive",
                                   "substrate.thickness_mm", "a positive number")

    # -- parameters ----------------------------------------------------------
    def _materials(self) -> list[tuple[str, Dispersion]]:
        items = [("ambient", self.ambient)]
        items += [(layer.name, layer.material) for layer in self.layers]
        items.append(("substrate", self.substrate))
        if self.exit is not None:
            items.append(("exit", self.exit))
        return items

    def parameters(self) -> dict[str, Param]:
        """Every parameter of the model by its full dotted name, top to bottom."""
        out: dict[str, Param] = {}
        for owner, material in self._materials():
            layer = self.layer(owner) if owner not in ("ambient", "substrate", "exit") else None
            if layer is not None:
                out[f"{owner}.thickness_nm"] = layer.thickness_nm
            for local, prm in material.parameters().items():
                out[f"{owner}.material.{local}"] = prm
        return out

    def specs(self) -> dict[str, ParamSpec]:
        """ParamSpec (unit, physical bounds) of every parameter by full name."""
        out: dict[str, ParamSpec] = {}
        for owner, material in self._materials():
            if owner not in ("ambient", "substrate", "exit"):
                out[f"{owner}.thickness_nm"] = THICKNESS_SPEC
            for local, spec in material.specs.items():
                out[f"{owner}.material.{local}"] = spec
        return out

    def free_parameters(self) -> dict[str, Param]:
        """Parameters a fit varies (vary and no expr)."""
        return {k: p for k, p in self.parameters().items() if p.is_free}

    def layer(self, name: str) -> Layer | None:
        for layer in self.layers:
            if layer.name == name:
                return layer
        return None

    def _split(self, values: Mapping[str, object]) -> tuple[dict, dict]:
        """Split full names into {owner: {local: v}} for materials and {layer: v} for thicknesses."""
        material_values: dict[str, dict] = {}
        thickness_values: dict[str, object] = {}
        owners = {owner for owner, _ in self._materials()}
        for key, val in values.items():
            owner, _, rest = key.partition(".")
            if owner not in owners:
                raise KeyError(f"no layer or medium '{owner}' for parameter '{key}'")
            if rest == "thickness_nm" and owner not in ("ambient", "substrate", "exit"):
                thickness_values[owner] = val
            elif rest.startswith("material."):
                material_values.setdefault(owner, {})[rest[len("material."):]] = val
            else:
                raise KeyError(f"unknown parameter '{key}'")
        return material_values, thickness_values

    def with_values(self, values: Mapping[str, float]) -> "Stack":
        """A new stack with some parameter values replaced (by full name)."""
        material_values, thickness_values = self._split(values)
        return self._rebuild(material_values, thickness_values, lambda m, v: m.with_values(v),
                             lambda p, v: p.with_value(v))

    def with_params(self, params: Mapping[str, Param]) -> "Stack":
        """A new stack with some Params replaced whole (by full name)."""
        material_values, thickness_values = self._split(params)
        return self._rebuild(material_values, thickness_values, lambda m, v: m.with_params(v),
                             lambda p, v: v)

    def _rebuild(self, material_values, thickness_values, set_material, set_thickness) -> "Stack":
        def mat(owner, material):
            return set_material(material, material_values[owner]) if owner in material_values else material

        layers = []
        for layer in self.layers:
            thickness = layer.thickness_nm
            if layer.name in thickness_values:
                thickness = set_thickness(thickness, thickness_values[layer.name])
            layers.append(replace(layer, material=mat(layer.name, layer.material), thickness_nm=thickness))
        return replace(self, layers=layers, ambient=mat("ambient", self.ambient),
                       substrate=mat("substrate", self.substrate),
                       exit=mat("exit", self.exit) if self.exit is not None else None,
                       extras=dict(self.extras))

    # -- optics ----------------------------------------------------------------
    def check_range(self, wavelength_nm) -> None:
        """Raise LaminaInputError if any material is asked outside its valid range."""
        for owner, material in self._materials():
            where = f"{owner}.material" + (f" ('{material.name}')" if material.name else "")
            material.check_range(wavelength_nm, where)

    def optical_inputs(self, wavelength_nm, values: Mapping[str, object] | None = None) -> OpticalInputs:
        """Complex indices and thicknesses for the solver; `values` may hold (B,) arrays."""
        wavelength_nm = np.asarray(wavelength_nm, dtype=float)
        self.check_range(wavelength_nm)
        material_values, thickness_values = self._split(values or {})

        def n_of(owner, material):
            return material.nk(wavelength_nm, material_values.get(owner))

        n_media = [n_of("ambient", self.ambient)]
        thickness, coherent = [], []
        for layer in self.layers:
            n_media.append(n_of(layer.name, layer.material))
            t = thickness_values.get(layer.name, layer.thickness_nm.value)
            t = np.asarray(t, dtype=float)
            thickness.append(float(t) if t.ndim == 0 else t)
            coherent.append(layer.coherent)
        n_media.append(n_of("substrate", self.substrate))
        if self.substrate_thickness_mm is not None:
            thickness.append(self.substrate_thickness_mm * 1e6)
            coherent.append(False)
            exit_medium = self.exit
            if exit_medium is None:
                from ..dispersion.constant import Constant
                exit_medium = Constant(1.0, 0.0, name="air")
            n_media.append(n_of("exit", exit_medium))
        return OpticalInputs(n_media, thickness, coherent)

    def to_toml(self) -> str:
        """Model-file text of this stack (see lamina.stack.modelfile)."""
        from .modelfile import stack_to_toml
        return stack_to_toml(self)

    def describe(self) -> str:
        """Human-readable one-line-per-medium summary."""
        def label(m):
            return m.name or m.law
        lines = [f"ambient   {label(self.ambient)}"]
        for layer in self.layers:
            t = layer.thickness_nm
            free = " (free)" if t.is_free else ""
            mode = "" if layer.coherent else " incoherent"
            lines.append(f"{layer.name:<9s} {label(layer.material)}  {t.value:g} nm{free}{mode}")
        sub = f"substrate {label(self.substrate)}"
        if self.substrate_thickness_mm is not None:
            sub += f"  {self.substrate_thickness_mm:g} mm slab (incoherent)"
        lines.append(sub)
        if self.exit is not None or self.substrate_thickness_mm is not None:
            lines.append(f"exit      {label(self.exit) if self.exit is not None else 'air'}")
        return "\n".join(lines)
