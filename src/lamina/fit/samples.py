"""Which data belong to which sample, and which parameters each sample owns.

One model, several samples: the samples share every parameter of the model
(optical constants above all) except those a sample *overrides*.  An override
gives that sample its own copy of the parameter, named ``<sample>.<full name>``
(``w1.oxide.thickness_nm``); shared parameters keep their plain names.

Model-file form (kept raw by the model-file loader in ``stack.extras["samples"]``)::

    [[samples]]
    name = "w1"
    data = "w1.csv"                     # or a list of files; relative to the model file
    overrides = { "oxide.thickness_nm" = { value = 100, min = 0, max = 500 } }

Python: ``lamina.fit(stack, {"w1": ds1, "w2": ds2})`` (overrides from the
stack's samples, or ``samples=[Sample(...)]``), or ``lamina.fit(stack, [ds1, ds2])``
when the stack lists exactly that many samples (data taken in sample order).
"""
from __future__ import annotations

import os
from dataclasses import dataclass, field
from typing import Mapping

from ..errors import LaminaInputError
from ..parameters import as_param
from ..stack.layers import LAYER_NAME
from .objective import make_block
from .parameters import ParameterTable


@dataclass
class Sample:
    """One measured sample: a name, its own parameters (full name -> Param) and its data files."""

    name: str
    overrides: dict = field(default_factory=dict)
    data: list = field(default_factory=list)


def parse_samples(stack, raw=None, where: str = "samples") -> list[Sample]:
    """Samples from a model file's raw ``[[samples]]`` list (validated here)."""
    raw = stack.extras.get("samples") if raw is None else raw
    if raw is None:
        return []
    if not isinstance(raw, list) or not all(isinstance(s, Mapping) for s in raw):
        raise LaminaInputError("'samples' is not a list of tables", where, "[[samples]] tables")
    params = stack.parameters()
    specs = stack.specs()
    reserved = {owner for owner in ["ambient", "substrate", "exit"] + [layer.name for layer in stack.layers]}
    out, seen = [], set()
    for i, entry in enumerate(raw, start=1):
        here = f"{where}[{i}]"
        unknown = sorted(set(entry) - {"name", "data", "overrides"})
        if unknown:
            raise LaminaInputError(f"unknown key '{unknown[0]}'", f"{here}.{unknown[0]}", "name, data, overrides")
        name = entry.get("name")
        if not isinstance(name, str) or not LAYER_NAME.match(name):
            raise LaminaInputError(f"sample name {name!r} is not allowed", f"{here}.name",
                                   "letters, digits, _ and -, starting with a letter")
        if name in reserved or name in seen:
            raise LaminaInputError(f"sample name '{name}' clashes with a layer, medium or another sample",
                                   f"{here}.name", "a unique sample name")
        seen.add(name)
        data = entry.get("data", [])
        data = [data] if isinstance(data, str) else data
        if not isinstance(data, list) or not all(isinstance(d, str) for d in data):
            raise LaminaInputError("data is not a file name or a list of file names", f"{here}.data",
                                   "\"file.csv\" or [\"a.csv\", \"b.csv\"]")
        overrides_raw = entry.get("overrides", {})
        if not isinstance(overrides_raw, Mapping):
            raise LaminaInputError("overrides is not a table", f"{here}.overrides",
                                   "a table of full parameter name -> value or {value, min, max}")
        overrides = {}
        for full, value in overrides_raw.items():
            if full not in params:
                raise LaminaInputError(f"unknown parameter '{full}'", f"{here}.overrides",
                                       "a full parameter name of the model, e.g. "
                                       + ", ".join(list(params)[:3]))
            overrides[full] = as_param(value, specs.get(full), f"{here}.overrides.{full}")
        out.append(Sample(name, overrides, data))
    return out


def assign_data(stack, data, samples: list[Sample] | None) -> list[tuple[Sample | None, list]]:
    """Pair each sample with its datasets; a single-sample fit has sample None."""
    if isinstance(data, Mapping) and not _is_dataset(data):
        samples = samples or []
        by_name = {s.name: s for s in samples}
        unknown = [name for name in data if samples and name not in by_name]
        if unknown:
            raise LaminaInputError(f"data given for unknown sample '{unknown[0]}'", "samples",
                                   "one of " + ", ".join(by_name))
        pairs = []
        for name, sets in data.items():
            sample = by_name.get(name) or Sample(str(name))
            pairs.append((sample, _as_list(sets)))
        return pairs
    sets = _as_list(data)
    if not samples:
        return [(None, sets)]
    if len(sets) != len(samples):
        raise LaminaInputError(f"{len(sets)} data sets for {len(samples)} samples", "samples",
                               "one data file per sample, in the order of [[samples]]")
    return [(sample, [ds]) for sample, ds in zip(samples, sets)]


def _read(path):
    """A measurement file given by name (convenience for the Python API)."""
    from ..data.readers import read_data
    return read_data(path)


def _is_dataset(obj) -> bool:
    return hasattr(obj, "data_vars") and hasattr(obj, "dims")


def _as_list(data) -> list:
    if data is None:
        return []
    if isinstance(data, (list, tuple)):
        sets = list(data)
    else:
        sets = [data]
    sets = [_read(ds) if isinstance(ds, (str, os.PathLike)) else ds for ds in sets]
    for k, ds in enumerate(sets, start=1):
        if not _is_dataset(ds):
            raise LaminaInputError(f"data item {k} is a {type(ds).__name__}, not a dataset", "data",
                                   "xarray Datasets from lamina.read_data")
    return sets


def build(stack, data, samples: list[Sample] | None = None):
    """ParameterTable and blocks for a (multi-sample) fit."""
    from .objective import Problem
    if samples is None:
        samples = parse_samples(stack)
    pairs = assign_data(stack, data, samples)
    if not any(sets for _, sets in pairs):
        raise LaminaInputError("no data to fit", "data", "at least one measurement file")
    params, specs = stack.parameters(), stack.specs()
    overridden_everywhere = set(params)
    for sample, _ in pairs:
        overridden_everywhere &= set(sample.overrides) if sample else set()
    table = ParameterTable()
    for full, prm in params.items():
        if full not in overridden_everywhere:
            spec = specs.get(full)
            table.add(full, prm, prm.unit or (spec.unit if spec else ""), bool(spec and spec.thickness_like))
    for sample, _ in pairs:
        if sample is None:
            continue
        for full, prm in sample.overrides.items():
            spec = specs.get(full)
            table.add(f"{sample.name}.{full}", prm, prm.unit or (spec.unit if spec else ""),
                      bool(spec and spec.thickness_like))
    table.resolve_exprs()
    if not table.free:
        raise LaminaInputError("the model has no free parameters", "model",
                               "at least one parameter given as a table {value, min, max} (vary = true)")
    blocks = []
    for sample, sets in pairs:
        sample_stack = stack.with_params(sample.overrides) if sample and sample.overrides else stack
        drivers = {}
        for full in params:
            public = f"{sample.name}.{full}" if sample and full in sample.overrides else full
            item = table.items[public]
            if item.param.is_free or item.param.expr is not None:
                drivers[full] = public
        for k, ds in enumerate(sets, start=1):
            label = str(ds.attrs.get("source_file", "")) if hasattr(ds, "attrs") else ""
            if not label:
                label = f"{sample.name if sample else 'data'}[{k}]"
            block = make_block(sample.name if sample else _stem(label), ds, sample_stack, label)
            block.drivers = drivers
            block.instrument = _instrument(stack)
            blocks.append(block)
    return Problem(table, blocks)


def _stem(label: str) -> str:
    return os.path.splitext(os.path.basename(label))[0] or "data"


def _instrument(stack):
    """An Instrument when the model asks for averaging, else None (fast path)."""
    raw = stack.extras.get("instrument")
    if not raw:
        return None
    if not isinstance(raw, Mapping):
        return raw
    if not any(float(v) for v in raw.values() if isinstance(v, (int, float))):
        return None
    from ..optics.averaging import Instrument
    return Instrument(**raw)


__all__ = ["Sample", "parse_samples", "assign_data", "build"]
