"""Model parameters: a value with bounds, a vary flag and an optional tie.

A `Param` is what a model file holds for every number that a fit may touch.
`ParamSpec` is what a dispersion law declares about one of its parameters:
unit and physical bounds (a broadening can never be negative, whatever the
model file says).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

from .errors import LaminaInputError


@dataclass(frozen=True)
class ParamSpec:
    """Declared meaning of a law parameter: unit, physical bounds, a line of help."""

    name: str
    unit: str = ""
    lower: float = -math.inf
    upper: float = math.inf
    doc: str = ""
    #: True when the parameter is a length that makes the optics periodic
    #: (thicknesses); the global search scans these with a period-aware grid.
    thickness_like: bool = False

    def check(self, value: float, where: str) -> None:
        """Raise LaminaInputError when `value` lies outside the physical bounds."""
        if not isinstance(value, (int, float)) or isinstance(value, bool) or math.isnan(value):
            raise LaminaInputError(f"{value!r} is not a number", where, f"a number for {self.name}")
        if value < self.lower or value > self.upper:
            raise LaminaInputError(
                f"{self.name} = {value} is outside its physical range",
                where,
                f"{_fmt_range(self.lower, self.upper)}{' ' + self.unit if self.unit else ''}",
            )


def _fmt_range(lo: float, hi: float) -> str:
    if math.isinf(lo) and math.isinf(hi):
        return "any finite value"
    if math.isinf(hi):
        return f">= {lo:g}"
    if math.isinf(lo):
        return f"<= {hi:g}"
    return f"{lo:g} .. {hi:g}"


@dataclass(frozen=True)
class Param:
    """A model number: `value`, fit bounds `min`/`max`, `vary`, and an lmfit-style `expr` tie.

    A plain number in a model file is a fixed Param (vary=False); a table
    `{value, min, max, vary, expr}` varies unless `vary = false` or it has an `expr`.
    """

    value: float
    min: float = -math.inf
    max: float = math.inf
    vary: bool = False
    expr: str | None = None
    unit: str = ""

    def with_value(self, value: float) -> "Param":
        return replace(self, value=float(value))

    @property
    def is_free(self) -> bool:
        return self.vary and self.expr is None

    def to_toml(self):
        """A plain number when fixed and unbounded, else a table (the model-file form)."""
        if not self.vary and self.expr is None and math.isinf(self.min) and math.isinf(self.max):
            return float(self.value)
        table: dict = {"value": float(self.value)}
        if not math.isinf(self.min):
            table["min"] = float(self.min)
        if not math.isinf(self.max):
            table["max"] = float(self.max)
        if not self.vary:
            table["vary"] = False
        if self.expr is not None:
            table["expr"] = self.expr
        return table


def as_param(raw, spec: ParamSpec | None = None, where: str = "") -> Param:
    """Build a Param from a model-file value (number or table) and check it.

    Checks: a number; min <= max; value inside [min, max]; value inside the
    physical bounds of `spec`. Fit bounds are clipped to the physical bounds.
    """
    unit = spec.unit if spec else ""
    if isinstance(raw, Param):
        param = raw
    elif isinstance(raw, bool) or raw is None:
        raise LaminaInputError(f"{raw!r} is not a number", where, "a number or a table {value, min, max, vary, expr}")
    elif isinstance(raw, (int, float)):
        param = Param(float(raw), unit=unit)
    elif isinstance(raw, dict):
        allowed = {"value", "min", "max", "vary", "expr"}
        unknown = sorted(set(raw) - allowed)
        if unknown:
            raise LaminaInputError(f"unknown key '{unknown[0]}'", f"{where}.{unknown[0]}" if where else unknown[0],
                                   "one of value, min, max, vary, expr")
        if "value" not in raw:
            raise LaminaInputError("missing 'value'", where, "a table with a 'value' key")
        vals = {}
        for key in ("value", "min", "max"):
            if key in raw:
                v = raw[key]
                if isinstance(v, bool) or not isinstance(v, (int, float)) or math.isnan(v):
                    raise LaminaInputError(f"{key} = {v!r} is not a number", f"{where}.{key}", "a number")
                vals[key] = float(v)
        vary = raw.get("vary", True)
        if not isinstance(vary, bool):
            raise LaminaInputError(f"vary = {vary!r} is not true/false", f"{where}.vary", "true or false")
        expr = raw.get("expr")
        if expr is not None and not isinstance(expr, str):
            raise LaminaInputError(f"expr = {expr!r} is not a string", f"{where}.expr", "a string expression")
        param = Param(vals["value"], vals.get("min", -math.inf), vals.get("max", math.inf),
                      vary=bool(vary) and expr is None, expr=expr, unit=unit)
    else:
        raise LaminaInputError(f"{raw!r} is not a number", where, "a number or a table {value, min, max, vary, expr}")

    if param.min > param.max:
        raise LaminaInputError(f"min = {param.min:g} is greater than max = {param.max:g}", where, "min <= max")
    if not (param.min <= param.value <= param.max):
        raise LaminaInputError(f"value = {param.value:g} is outside [min, max] = [{param.min:g}, {param.max:g}]",
                               where, "min <= value <= max")
    if spec is not None:
        spec.check(param.value, where)
        if not param.vary:
            # a fixed number keeps its (absent) bounds so that it writes back as a plain number
            return param
        lo, hi = max(param.min, spec.lower), min(param.max, spec.upper)
        if (lo, hi) != (param.min, param.max):
            param = replace(param, min=lo, max=hi)
    return param
