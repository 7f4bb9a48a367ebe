"""Measurement files (CSV, NetCDF) <-> xarray.Dataset, atomic writers, sample data.

``read_data``, ``merge_data`` (readers.py), ``write_data``, ``atomic_write``
(writers.py), ``sample_path`` (the bundled sample data).  Submodules load on
first use so that importing lamina.data stays cheap.
"""
from __future__ import annotations

import importlib
from pathlib import Path

_LAZY = {
    "read_data": "readers", "merge_data": "readers", "read_csv_text": "readers", "parse_table": "readers",
    "table_to_dataset": "readers", "write_data": "writers", "atomic_write": "writers",
    "atomic_path": "writers", "atomic_write_text": "writers", "atomic_write_bytes": "writers",
}


def sample_path(*parts: str) -> Path:
    """Path of a file (or the folder) of the bundled sample data: ``sample_path("oxide_on_si.toml")``.

    The sample data is invented for demonstration (see its README.md).
    """
    from importlib.resources import files

    path = Path(str(files("lamina") / "sample_data")).joinpath(*parts)
    if parts and not path.exists():
        from ..errors import LaminaInputError
        raise LaminaInputError(f"no sample file '{'/'.join(parts)}'", str(path.parent),
                               "one of " + ", ".join(sorted(p.name for p in path.parent.glob("*")
                                                            if not p.name.startswith("."))))
    return path


def __getattr__(name):
    if name in _LAZY:
        return getattr(importlib.import_module(f"lamina.data.{_LAZY[name]}"), name)
    raise AttributeError(f"module 'lamina.data' has no attribute '{name}'")


__all__ = sorted(_LAZY) + ["sample_path"]
