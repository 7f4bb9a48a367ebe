"""Atomic output files and measurement-file writers (CSV, NetCDF).

Every file lamina writes goes to a temporary name in the destination folder and
is renamed over the final name only when complete (``os.replace`` is atomic on
one file system), so a crash or an error never leaves a half-written or
clobbered file behind.
"""
from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Iterable, Iterator, Mapping

import numpy as np

from ..errors import LaminaInputError
from .columns import COLUMN_OF_VARIABLE, VARIABLE_ORDER

#: dataset attributes that describe where data came from, not what it is
PROVENANCE_ATTRS = ("source_file", "sha256")


def _target(path: str | os.PathLike) -> Path:
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise LaminaInputError("the output folder does not exist", str(folder), "an existing folder")
    if path.is_dir():
        raise LaminaInputError("is a folder", str(path), "a file name")
    return path


def _umask_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path next to `path` (same suffix); rename it to `path` on success.

    For libraries that write by file name (``Dataset.to_netcdf``, ``savefig``).
    On any exception the temporary file is removed and `path` is untouched.
    """
    path = _target(path)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=f".tmp{path.suffix}", dir=path.parent or ".")
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        os.chmod(tmp, _umask_mode())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


@contextlib.contextmanager
def atomic_write(path: str | os.PathLike, mode: str = "w", encoding: str | None = "utf-8",
                 newline: str | None = None):
    """Open a temporary file next to `path` for writing; rename it over `path` when the block ends.

    ``with atomic_write("out.csv") as fh: fh.write(text)``.  Binary modes ignore `encoding`.
    """
    with atomic_path(path) as tmp:
        kwargs = {} if "b" in mode else {"encoding": encoding, "newline": newline}
        with open(tmp, mode, **kwargs) as handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write `text` (UTF-8) to `path` atomically; returns the path."""
    with atomic_write(path, "w", newline="\n") as handle:
        handle.write(text)
    return Path(path)


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write `data` to `path` atomically; returns the path."""
    with atomic_write(path, "wb") as handle:
        handle.write(data)
    return Path(path)


# ---------------------------------------------------------------------------
# measurement files
# ---------------------------------------------------------------------------

def write_data(dataset, path: str | os.PathLike, comments: Iterable[str] = (),
               metadata: Mapping[str, object] | None = None) -> Path:
    """Write a measurement Dataset (dims angle, wavelength) as CSV (.csv) or NetCDF (.nc).

    `comments` are free-form lines and `metadata` ``key: value`` lines for the CSV
    header (NetCDF keeps them as attributes); the dataset's own attrs are written
    too, except provenance (source_file, sha256), which the reader sets afresh.
    """
    suffix = Path(path).suffix.lower()
    if suffix == ".csv":
        return write_csv(dataset, path, comments, metadata)
    if suffix in (".nc", ".netcdf", ".h5"):
        return write_netcdf(dataset, path, comments, metadata)
    raise LaminaInputError(f"unknown output type '{suffix or '(none)'}'", str(path),
                           "a file name ending in .csv or .nc")


def _variables(dataset) -> list[str]:
    return [name for name in VARIABLE_ORDER if name in dataset.data_vars]


def _header_metadata(dataset, metadata: Mapping[str, object] | None) -> dict[str, str]:
    merged: dict[str, str] = {}
    for key, value in dataset.attrs.items():
        if key not in PROVENANCE_ATTRS:
            merged[str(key)] = str(value)
    for key, value in (metadata or {}).items():
        merged[str(key)] = str(value)
    return merged


def write_csv(dataset, path, comments: Iterable[str] = (), metadata: Mapping[str, object] | None = None) -> Path:
    """Long-form CSV: one row per (angle, wavelength) point; every cell filled; floats exact."""
    import pandas as pd

    names = _variables(dataset)
    if not names:
        raise LaminaInputError("nothing to write: the dataset has no measured quantity", str(path),
                               "at least one of " + ", ".join(VARIABLE_ORDER))
    ds = dataset[names].transpose("angle", "wavelength")
    angle, wavelength = np.meshgrid(ds["angle"].values, ds["wavelength"].values, indexing="ij")
    columns = {"wavelength_nm": wavelength.ravel(), "angle_deg": angle.ravel()}
    for name in names:
        columns[COLUMN_OF_VARIABLE[name]] = np.asarray(ds[name].values, dtype=float).ravel()
    frame = pd.DataFrame(columns)
    values = frame[[COLUMN_OF_VARIABLE[n] for n in names]].to_numpy()
    measured = np.isfinite(values)
    keep = measured.any(axis=1)
    if not (measured[keep].all()):
        raise LaminaInputError("the dataset has gaps (a quantity missing at some measured points); "
                               "a CSV measurement file cannot hold empty cells", str(path),
                               "NetCDF output (.nc), or one CSV file per quantity set")
    frame = frame[keep]
    lines = [f"# {line}" if line.strip() else "#" for text in comments for line in str(text).splitlines() or [""]]
    for key, value in _header_metadata(dataset, metadata).items():
        for i, line in enumerate(str(value).splitlines() or [""]):
            lines.append(f"# {key}: {line}" if i == 0 else f"#   {line}")
    body = _csv_body(frame)
    return atomic_write_text(path, "\n".join(lines) + ("\n" if lines else "") + body)


def _csv_body(frame) -> str:
    """Header and rows with every float as Python's repr: the shortest text that reads back exactly.

    Written by hand rather than by DataFrame.to_csv, whose float text follows numpy's
    global print options (which some libraries change on import, e.g. to 12 digits).
    """
    columns = [frame[name].to_numpy(dtype=float).tolist() for name in frame.columns]
    lines = [",".join(frame.columns)]
    lines += [",".join(map(repr, row)) for row in zip(*columns)]
    return "\n".join(lines) + "\n"


def write_netcdf(dataset, path, comments: Iterable[str] = (), metadata: Mapping[str, object] | None = None) -> Path:
    """NetCDF4 (h5netcdf) with the dataset's variables, units and metadata as attributes."""
    ds = dataset.copy()
    attrs = {k: v for k, v in _header_metadata(dataset, metadata).items()}
    notes = [str(c) for c in comments if str(c).strip()]
    if notes:
        attrs["comments"] = "\n".join(notes)
    ds.attrs = attrs
    for name in ds.variables:
        ds[name].attrs = {k: (int(v) if isinstance(v, bool) else v) for k, v in ds[name].attrs.items()
                          if v is not None}
    write_netcdf_file(ds, path)
    return Path(path)


def write_netcdf_file(dataset, path: str | os.PathLike) -> Path:
    """Any xarray Dataset to a NetCDF file, atomically.

    Written as NetCDF-3 (64-bit offset) by scipy's writer, which needs no HDF5
    library; every NetCDF reader (xarray, netCDF4, ncdump) opens it.
    """
    with atomic_path(path) as tmp:
        dataset.to_netcdf(tmp, engine="scipy", format="NETCDF3_64BIT")
    return Path(path)
