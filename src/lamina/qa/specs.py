"""Spec files: wafer geometry, per-site limits and uniformity limits (TOML, lamina schema).

    [wafer]
    diameter_mm = 150            # optional, default 150
    edge_exclusion_mm = 5        # optional, default 0

    [limits."oxide.thickness_nm"]
    lower = 146.0                # either bound may be left out
    upper = 152.0

    [uniformity."oxide.thickness_nm"]
    max_nonuniformity_pct = 2.0  # (max - min) / (2 mean) * 100 over the sites in the zone
    max_std_over_mean_pct = 1.0  # optional: std / mean * 100

Parameter names are the model's dotted names and must be free parameters of the
model (a fixed parameter would be the same at every site).  Any other key, a
wrong type, or lower > upper is bad input (exit 2) naming the file and key path.
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable

from ..errors import LaminaInputError
from .wafer import WaferGeometry

TOP_KEYS = ("wafer", "limits", "uniformity")
WAFER_KEYS = ("diameter_mm", "edge_exclusion_mm")
LIMIT_KEYS = ("lower", "upper")
UNIFORMITY_KEYS = ("max_nonuniformity_pct", "max_std_over_mean_pct")


@dataclass(frozen=True)
class Spec:
    """A parsed spec file."""

    geometry: WaferGeometry = WaferGeometry(150.0, 0.0)
    #: parameter -> (lower, upper); a missing bound is -inf / +inf
    limits: dict = field(default_factory=dict)
    #: parameter -> {"max_nonuniformity_pct": x, "max_std_over_mean_pct": y}
    uniformity: dict = field(default_factory=dict)
    path: str = ""

    def parameters(self) -> list[str]:
        return sorted(set(self.limits) | set(self.uniformity))


def _number(value, where: str, expected: str = "a number") -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or math.isnan(value):
        raise LaminaInputError(f"{value!r} is not a number", where, expected)
    return float(value)


def _table(value, where: str, expected: str) -> dict:
    if not isinstance(value, dict):
        raise LaminaInputError(f"{value!r} is not a table", where, expected)
    return value


def _check_keys(table: dict, allowed: Iterable[str], where: str) -> None:
    allowed = tuple(allowed)
    for key in table:
        if key not in allowed:
            path = f"{where}.{key}" if where else key
            raise LaminaInputError(f"unknown key '{key}'", path, "one of " + ", ".join(allowed))


def _read_geometry(raw, file: str) -> WaferGeometry:
    table = _table(raw, f"{file}: wafer", "a [wafer] table")
    _check_keys(table, WAFER_KEYS, f"{file}: wafer")
    diameter = _number(table.get("diameter_mm", 150.0), f"{file}: wafer.diameter_mm", "a diameter in mm")
    exclusion = _number(table.get("edge_exclusion_mm", 0.0), f"{file}: wafer.edge_exclusion_mm",
                        "an edge exclusion in mm")
    if diameter <= 0:
        raise LaminaInputError(f"diameter_mm = {diameter:g} is not positive", f"{file}: wafer.diameter_mm",
                               "a positive diameter in mm")
    if not 0 <= exclusion < diameter / 2:
        raise LaminaInputError(f"edge_exclusion_mm = {exclusion:g} leaves no wafer",
                               f"{file}: wafer.edge_exclusion_mm", f"0 <= edge_exclusion_mm < {diameter / 2:g}")
    return WaferGeometry(diameter, exclusion)


def _check_parameter(name: str, free: list[str] | None, where: str) -> None:
    if free is not None and name not in free:
        raise LaminaInputError(f"'{name}' is not a free parameter of the model", where,
                               "one of " + (", ".join(free) if free else "(the model has no free parameter)"))


def _read_limits(raw, free, file: str) -> dict:
    limits = {}
    for name, entry in _table(raw, f"{file}: limits", "a [limits.\"<parameter>\"] table").items():
        where = f'{file}: limits."{name}"'
        _check_parameter(name, free, where)
        entry = _table(entry, where, "a table with lower and/or upper")
        _check_keys(entry, LIMIT_KEYS, where)
        if not entry:
            raise LaminaInputError("no bound given", where, "lower and/or upper")
        lower = _number(entry.get("lower", -math.inf), f"{where}.lower")
        upper = _number(entry.get("upper", math.inf), f"{where}.upper")
        if lower > upper:
            raise LaminaInputError(f"lower = {lower:g} is greater than upper = {upper:g}", where, "lower <= upper")
        limits[name] = (lower, upper)
    return limits


def _read_uniformity(raw, free, file: str) -> dict:
    uniformity = {}
    for name, entry in _table(raw, f"{file}: uniformity", "a [uniformity.\"<parameter>\"] table").items():
        where = f'{file}: uniformity."{name}"'
        _check_parameter(name, free, where)
        entry = _table(entry, where, "a table with max_nonuniformity_pct and/or max_std_over_mean_pct")
        _check_keys(entry, UNIFORMITY_KEYS, where)
        if not entry:
            raise LaminaInputError("no limit given", where, "max_nonuniformity_pct and/or max_std_over_mean_pct")
        checked = {}
        for key, value in entry.items():
            number = _number(value, f"{where}.{key}", "a percentage")
            if number < 0:
                raise LaminaInputError(f"{key} = {number:g} is negative", f"{where}.{key}", "a percentage >= 0")
            checked[key] = number
        uniformity[name] = checked
    return uniformity


def parse_spec(text: str, file: str = "<spec>", free_parameters: Iterable[str] | None = None) -> Spec:
    """Parse spec-file text; `free_parameters` (if given) are the names the spec may use."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise LaminaInputError(f"not valid TOML: {exc}", file, "a TOML spec file") from None
    for key in raw:
        if key not in TOP_KEYS:
            raise LaminaInputError(f"unknown key '{key}'", f"{file}: {key}", "one of " + ", ".join(TOP_KEYS))
    free = sorted(free_parameters) if free_parameters is not None else None
    geometry = _read_geometry(raw.get("wafer", {}), file)
    limits = _read_limits(raw.get("limits", {}), free, file)
    uniformity = _read_uniformity(raw.get("uniformity", {}), free, file)
    return Spec(geometry, limits, uniformity, path=file)


def read_spec(path, free_parameters: Iterable[str] | None = None) -> Spec:
    """Read and check a spec file; see the module docstring for the schema."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise LaminaInputError("file not found", str(path), "an existing spec file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise LaminaInputError(f"cannot read: {exc}", str(path), "a readable UTF-8 TOML file") from None
    return parse_spec(text, str(path), free_parameters)
