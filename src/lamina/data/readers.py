"""Measurement files -> xarray.Dataset (reference: docs/data-files.md).

``read_data(path)`` reads a CSV or NetCDF measurement file (or a list of them,
merged on the union grid) into a Dataset with dims ``angle`` and ``wavelength``
(sorted), variables ``psi``, ``delta``, ``R``, ``T`` ... as present, their
one-sigma uncertainties ``psi_err`` ... when given, NaN where a point was not
measured, and attrs ``source_file``, ``sha256`` and the file's metadata.

Every problem is a `LaminaInputError` naming ``file:line`` and the column.

The CSV parsing is split in reusable steps for other readers of the same
columns (the wafer-map reader): `read_csv_text` (comments, header, raw cells),
`parse_table` (numbers, checks; optionally collecting per-row problems instead
of raising, and passing through caller-defined extra columns) and
`table_to_dataset` (a selection of rows onto the grid).
"""
from __future__ import annotations

import csv
import hashlib
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable, Sequence

import numpy as np

from ..errors import LaminaInputError
from ..units import HC_EV_NM
from .columns import (ABSCISSA_COLUMNS, ACCEPTED_COLUMNS, FRACTIONS, QUANTITIES, VARIABLE_OF_COLUMN,
                      VARIABLE_ORDER, VARIABLES, error_of)

#: fractions may stray this far outside [0, 1] (noise around 0 or 1 in a real
#: measurement), or 5 sigma when the row gives a larger uncertainty
FRACTION_TOLERANCE = 0.01
#: Psi may stray 5 sigma outside [0, 90] when the row gives an uncertainty
SIGMA_TOLERANCE = 5.0
#: columns of a wafer-map file (lamina.qa.maps), named in a hint when found in a measurement file
MAP_COLUMNS = ("site", "x_mm", "y_mm", "wafer")
#: attribute names the reader sets itself; file metadata with these keys is kept as meta_<key>
RESERVED_ATTRS = ("source_file", "sha256")


# ---------------------------------------------------------------------------
# step 1: the text of a CSV file
# ---------------------------------------------------------------------------

@dataclass
class CsvText:
    """A CSV file split into metadata, header and raw data cells (with file line numbers)."""

    label: str
    sha256: str
    metadata: dict[str, str]
    header: list[str]
    header_line: int
    rows: list[list[str]]
    lines: np.ndarray


def _read_bytes(path: Path, expected: str) -> bytes:
    try:
        return path.read_bytes()
    except FileNotFoundError:
        raise LaminaInputError("file not found", str(path), expected) from None
    except IsADirectoryError:
        raise LaminaInputError("is a folder", str(path), expected) from None


def read_csv_text(path: str | os.PathLike) -> CsvText:
    """Split a measurement CSV into ``# key: value`` metadata, header row and data rows."""
    path = Path(path)
    label = str(path)
    raw = _read_bytes(path, "an existing measurement file (.csv or .nc)")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise LaminaInputError(f"not UTF-8 text (byte {exc.start})", label, "a UTF-8 CSV file") from None
    metadata: dict[str, str] = {}
    header: list[str] | None = None
    header_line = 0
    rows: list[list[str]] = []
    lines: list[int] = []
    last_key: list[str | None] = [None]
    data_lines: list[str] = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            _add_metadata(metadata, stripped[1:], last_key)
            continue
        if header is None:
            header, header_line = [c.strip() for c in next(csv.reader([line]))], number
            continue
        data_lines.append(line)
        lines.append(number)
    if header is not None:
        # one csv.reader over all rows (quotes allowed), then one count check
        rows = list(csv.reader(data_lines))
        widths = np.fromiter((len(r) for r in rows), dtype=int, count=len(rows))
        ragged = np.flatnonzero(widths != len(header))
        if ragged.size:
            first = int(ragged[0])
            raise LaminaInputError(f"{widths[first]} fields where the header has {len(header)}",
                                   f"{label}:{lines[first]}", "one value per header column, separated by commas")
    if header is None:
        raise LaminaInputError("no header row", label, "a header row naming the columns, e.g. "
                               "wavelength_nm,angle_deg,psi_deg,delta_deg")
    if not rows:
        raise LaminaInputError("no data rows", f"{label}:{header_line}", "at least one data row after the header")
    return CsvText(label, hashlib.sha256(raw).hexdigest(), metadata, header, header_line, rows,
                   np.asarray(lines, dtype=int))


def _add_metadata(metadata: dict[str, str], raw: str, last_key: list) -> None:
    """``key: value`` comments become metadata; other comment text is collected under 'comment'.

    A comment indented by two or more spaces continues the previous key's value
    on a new line (how the writer stores multi-line values).
    """
    comment = raw.strip()
    if not comment:
        return
    if raw.startswith("  ") and last_key[0] is not None:
        metadata[last_key[0]] = f"{metadata[last_key[0]]}\n{comment}"
        return
    last_key[0] = None
    key, sep, value = comment.partition(":")
    key = key.strip()
    if sep and key and len(key) <= 100 and all(ch.isalnum() or ch in "_- ." for ch in key):
        key = key.replace(" ", "_")
        if key in RESERVED_ATTRS:
            key = f"meta_{key}"
        metadata[key] = f"{metadata[key]}\n{value.strip()}" if key in metadata else value.strip()
        last_key[0] = key
    else:
        metadata["comment"] = f"{metadata['comment']}\n{comment}" if "comment" in metadata else comment


# ---------------------------------------------------------------------------
# step 2: numbers and checks
# ---------------------------------------------------------------------------

@dataclass
class Table:
    """Parsed columns: abscissae and variables as float arrays, extra columns as strings.

    ``values`` holds ``wavelength_nm``, ``angle_deg`` and dataset variable names
    (``psi``, ``psi_err``, ``R`` ...); ``extra`` the caller's extra columns
    (raw text); ``lines`` the file line of each row; ``problems`` (only when
    parsing with ``collect=True``) the first problem of each bad row by row index.
    """

    label: str
    sha256: str
    metadata: dict[str, str]
    values: dict[str, np.ndarray]
    extra: dict[str, np.ndarray]
    lines: np.ndarray
    columns: dict[str, int] = field(default_factory=dict)
    problems: dict[int, LaminaInputError] = field(default_factory=dict)
    abscissa: str = "wavelength_nm"

    @property
    def variables(self) -> list[str]:
        return [v for v in VARIABLE_ORDER if v in self.values]


def _check_header(csv_text: CsvText, extra_columns: Sequence[str]) -> dict[str, int]:
    """Column name -> 0-based position, after checking names, duplicates and required columns."""
    where = f"{csv_text.label}:{csv_text.header_line}"
    accepted = tuple(ACCEPTED_COLUMNS) + tuple(extra_columns)
    positions: dict[str, int] = {}
    header = csv_text.header
    if len(header) == 1 and any(sep in header[0] for sep in (";", "\t")):
        raise LaminaInputError("the header is one column: the columns seem separated by ';' or tabs", where,
                               "columns separated by commas (and '.' as the decimal point)")
    if all(_is_number(name) for name in header):
        raise LaminaInputError("the first row holds numbers: the header row is missing", where,
                               "a header row naming the columns, e.g. wavelength_nm,angle_deg,psi_deg,delta_deg")
    for index, name in enumerate(header):
        if name not in accepted:
            hint = None
            if name in MAP_COLUMNS:
                hint = "this looks like a wafer-map file: read it with 'lamina map' or lamina.read_map"
            raise LaminaInputError(f"unknown column '{name}' (column {index + 1})", where,
                                   "column names among " + ", ".join(accepted), hint=hint)
        if name in positions:
            raise LaminaInputError(f"column '{name}' appears twice (columns {positions[name] + 1} and {index + 1})",
                                   where, "each column once")
        positions[name] = index
    if ("wavelength_nm" in positions) == ("energy_ev" in positions):
        problem = "both wavelength_nm and energy_ev" if "wavelength_nm" in positions else "no wavelength_nm column"
        raise LaminaInputError(problem, where, "exactly one of wavelength_nm or energy_ev")
    quantities = [q for q in QUANTITIES if VARIABLES[q][0] in positions]
    if not quantities:
        raise LaminaInputError("no measured quantity among the columns", where,
                               "at least one of " + ", ".join(VARIABLES[q][0] for q in QUANTITIES))
    for q in QUANTITIES:
        err_col = VARIABLES[error_of(q)][0]
        if err_col in positions and VARIABLES[q][0] not in positions:
            raise LaminaInputError(f"column '{err_col}' without column '{VARIABLES[q][0]}'", where,
                                   f"an uncertainty column next to its quantity {VARIABLES[q][0]}")
    return positions


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _to_numbers(cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Float values and a mask of cells that are not finite numbers (empty, text, NaN, inf)."""
    try:  # fast path: numpy parses every cell (surrounding spaces, nan and inf included)
        numbers = np.asarray(cells, dtype=str).astype(float)
    except ValueError:  # some cell is not a number: parse cell by cell, bad ones become NaN
        import pandas as pd

        numbers = pd.to_numeric(pd.Series(cells, dtype=object).str.strip(), errors="coerce").to_numpy(dtype=float)
    return numbers, ~np.isfinite(numbers)


def _cell_problem(cell: str) -> str:
    text = cell.strip()
    if not text:
        return "empty cell"
    if text.lower() in ("nan", "na", "n/a", "null", "none", "-nan", "+nan"):
        return f"'{text}' (not a number: a missing value)"
    if text.lower().lstrip("+-") in ("inf", "infinity"):
        return f"'{text}' is not a finite number"
    return f"'{text}' is not a number"


class _Problems:
    """Collects the first problem per row (collect mode) or raises the earliest one."""

    def __init__(self, csv_text: CsvText, collect: bool):
        self.csv_text, self.collect = csv_text, collect
        self.found: dict[int, LaminaInputError] = {}

    def report(self, bad_rows: np.ndarray, column: str, position: int, make_problem, expected: str) -> None:
        rows = np.flatnonzero(bad_rows)
        if rows.size == 0:
            return
        if not self.collect:
            rows = rows[:1]
        for row in rows:
            line = int(self.csv_text.lines[row])
            err = LaminaInputError(make_problem(row), f"{self.csv_text.label}:{line}: column {position + 1} ({column})",
                                   expected)
            if not self.collect:
                self.found.setdefault(int(row), err)
            elif int(row) not in self.found:
                self.found[int(row)] = err

    def raise_first(self) -> None:
        if self.found and not self.collect:
            raise self.found[min(self.found)]


def parse_table(csv_text: CsvText, extra_columns: Sequence[str] = (), collect: bool = False) -> Table:
    """Numbers and range checks for every accepted column of a CSV text.

    With ``collect=False`` the earliest problem in the file raises.  With
    ``collect=True`` the first problem of each bad row is kept in
    ``Table.problems`` (row index -> error) and the row's values are left as
    parsed (NaN where not a number); header problems always raise.
    """
    positions = _check_header(csv_text, extra_columns)
    cells = np.asarray(csv_text.rows, dtype=object).reshape(len(csv_text.rows), len(csv_text.header))
    problems = _Problems(csv_text, collect)
    values: dict[str, np.ndarray] = {}
    for column, position in positions.items():
        if column in extra_columns:
            continue
        numbers, bad = _to_numbers(cells[:, position])
        problems.report(bad, column, position, lambda r, p=position: _cell_problem(str(cells[r, p])),
                        "a finite number")
        key = column if column in ABSCISSA_COLUMNS else VARIABLE_OF_COLUMN[column]
        values[key] = numbers
    extra = {c: np.asarray([str(x).strip() for x in cells[:, positions[c]]], dtype=object)
             for c in extra_columns if c in positions}
    abscissa = "wavelength_nm" if "wavelength_nm" in values else "energy_ev"
    _check_ranges(values, positions, problems)
    problems.raise_first()
    if abscissa == "energy_ev":
        with np.errstate(divide="ignore", invalid="ignore"):
            values["wavelength_nm"] = HC_EV_NM / values.pop("energy_ev")
    if "angle_deg" not in values:
        values["angle_deg"] = np.zeros(len(csv_text.rows))
    if "delta" in values:
        # Delta is an angle: report it in [0, 360) whatever range the file used
        values["delta"] = np.mod(values["delta"], 360.0)
    return Table(csv_text.label, csv_text.sha256, dict(csv_text.metadata), values, extra, csv_text.lines,
                 positions, problems.found if collect else {}, abscissa)


def _check_ranges(values: dict[str, np.ndarray], positions: dict[str, int], problems: _Problems) -> None:
    """Physical ranges, vectorized; NaN cells were reported already and are skipped here."""
    def check(key, column, bad, describe, expected):
        problems.report(bad, column, positions[column], lambda r: describe(values[key][r]), expected)

    with np.errstate(invalid="ignore"):
        for key in ("wavelength_nm", "energy_ev"):
            if key in values:
                check(key, key, values[key] <= 0, lambda v, k=key: f"{k} = {v:g} is not positive", "a positive number")
        if "angle_deg" in values:
            a = values["angle_deg"]
            check("angle_deg", "angle_deg", (a < 0) | (a >= 90), lambda v: f"angle_deg = {v:g} is outside [0, 90)",
                  "an angle of incidence in degrees, 0 <= angle < 90")
        for q in QUANTITIES:
            err = error_of(q)
            if err in values:
                column = VARIABLES[err][0]
                check(err, column, values[err] <= 0, lambda v, c=column: f"{c} = {v:g} is not positive",
                      "a positive one-sigma uncertainty")
        if "psi" in values:
            slack = SIGMA_TOLERANCE * values["psi_err"] if "psi_err" in values else 0.0
            p = values["psi"]
            check("psi", "psi_deg", (p < -slack) | (p > 90 + slack), lambda v: f"psi_deg = {v:g} is outside [0, 90]",
                  "Psi in degrees, 0 <= Psi <= 90")
        for q in FRACTIONS:
            if q in values:
                slack = FRACTION_TOLERANCE
                if error_of(q) in values:
                    slack = np.maximum(slack, SIGMA_TOLERANCE * values[error_of(q)])
                v = values[q]
                check(q, q, (v < -slack) | (v > 1 + slack), lambda x, q=q: f"{q} = {x:g} is outside [0, 1]",
                      "a fraction between 0 and 1 (not percent)")


# ---------------------------------------------------------------------------
# step 3: rows onto the (angle, wavelength) grid
# ---------------------------------------------------------------------------

def table_to_dataset(table: Table, rows: np.ndarray | None = None, attrs: dict | None = None):
    """A Dataset of the selected rows (all by default) on their sorted (angle, wavelength) grid.

    Raises on a (wavelength, angle) point given twice, naming both lines.
    """
    import xarray as xr

    an_axis, wl_axis, grids = grid_rows(table, rows)
    data_vars = {name: (("angle", "wavelength"), grid, variable_attrs(name)) for name, grid in grids.items()}
    ds = xr.Dataset(data_vars, coords=coordinates(an_axis, wl_axis))
    ds.attrs = {"source_file": table.label, "sha256": table.sha256}
    ds.attrs.update(table.metadata)
    if table.abscissa == "energy_ev":
        ds.attrs["abscissa_in_file"] = "energy_ev (converted to wavelength_nm = 1239.841984 / energy_ev)"
    ds.attrs.update(attrs or {})
    return ds


def grid_rows(table: Table, rows: np.ndarray | None = None):
    """(angle axis, wavelength axis, {variable: (A, W) array, NaN where not given}) of the selected rows.

    The numpy core of `table_to_dataset`, for callers that grid many row sets (the
    wafer-map reader, one set per site) and build one Dataset at the end.
    Raises on a (wavelength, angle) point given twice, naming both lines.
    """
    rows = np.arange(len(table.lines)) if rows is None else np.asarray(rows)
    if rows.dtype == bool:
        rows = np.flatnonzero(rows)
    wavelength = table.values["wavelength_nm"][rows]
    angle = table.values["angle_deg"][rows]
    _check_duplicates(table, rows, wavelength, angle)
    wl_axis, wl_index = np.unique(wavelength, return_inverse=True)
    an_axis, an_index = np.unique(angle, return_inverse=True)
    grids = {}
    for name in table.variables:
        grid = np.full((an_axis.size, wl_axis.size), np.nan)
        grid[an_index, wl_index] = table.values[name][rows]
        grids[name] = grid
    return an_axis, wl_axis, grids


def _check_duplicates(table: Table, rows: np.ndarray, wavelength: np.ndarray, angle: np.ndarray) -> None:
    if rows.size < 2:
        return
    order = np.lexsort((angle, wavelength))
    same = (wavelength[order][1:] == wavelength[order][:-1]) & (angle[order][1:] == angle[order][:-1])
    if same.any():
        i = int(np.flatnonzero(same)[0])
        first, second = sorted((int(table.lines[rows[order[i]]]), int(table.lines[rows[order[i + 1]]])))
        raise LaminaInputError(
            f"duplicate point wavelength {wavelength[order[i]]:g} nm, angle {angle[order[i]]:g} deg "
            f"(also on line {first})", f"{table.label}:{second}", "each (wavelength, angle) point once")


def variable_attrs(name: str) -> dict:
    _, units, long_name = VARIABLES[name]
    return {"units": units, "long_name": long_name}


def coordinates(angle_deg, wavelength_nm) -> dict:
    return {
        "angle": ("angle", np.asarray(angle_deg, dtype=float), {"units": "deg", "long_name": "angle of incidence"}),
        "wavelength": ("wavelength", np.asarray(wavelength_nm, dtype=float),
                       {"units": "nm", "long_name": "vacuum wavelength"}),
    }


# ---------------------------------------------------------------------------
# public entry points
# ---------------------------------------------------------------------------

def read_csv(path: str | os.PathLike):
    """A measurement CSV file as a Dataset (see module docstring)."""
    return table_to_dataset(parse_table(read_csv_text(path)))


def read_netcdf(path: str | os.PathLike):
    """A measurement NetCDF file (as lamina writes it) as a Dataset, checked like a CSV file."""
    import xarray as xr

    path = Path(path)
    label = str(path)
    raw = _read_bytes(path, "an existing measurement file (.csv or .nc)")
    ds = open_netcdf(path, raw[:8])
    ds = _check_netcdf(ds, label)
    ds.attrs["source_file"] = label
    ds.attrs["sha256"] = hashlib.sha256(raw).hexdigest()
    return ds


def open_netcdf(path: str | os.PathLike, head: bytes | None = None):
    """Load a NetCDF file into memory (file closed): NetCDF-3 via scipy, NetCDF-4 via any engine installed."""
    import xarray as xr

    path = Path(path)
    if head is None:
        head = _read_bytes(path, "an existing NetCDF file")[:8]
    engines = ["scipy"] if head.startswith(b"CDF") else ["h5netcdf", "netcdf4", None]
    problem = "not a NetCDF file"
    for engine in engines:
        try:
            with xr.open_dataset(path, engine=engine) as opened:
                return opened.load()
        except Exception as exc:  # backends raise many types for a foreign or broken file
            problem = f"{type(exc).__name__}: {exc}"
    raise LaminaInputError(f"cannot read as NetCDF ({problem})", str(path),
                           "a NetCDF file as lamina writes it (dims angle, wavelength)")


def _check_netcdf(ds, label: str):
    for dim in ("angle", "wavelength"):
        if dim not in ds.dims:
            raise LaminaInputError(f"no '{dim}' dimension (dims are {', '.join(map(str, ds.dims)) or 'none'})",
                                   label, "dims angle and wavelength")
    unknown = [str(v) for v in ds.data_vars if v not in VARIABLES]
    if unknown:
        raise LaminaInputError(f"unknown variable '{unknown[0]}'", label,
                               "variables among " + ", ".join(VARIABLE_ORDER))
    if not any(q in ds.data_vars for q in QUANTITIES):
        raise LaminaInputError("no measured quantity", label, "at least one of " + ", ".join(QUANTITIES))
    for name in ds.data_vars:
        if set(ds[name].dims) != {"angle", "wavelength"}:
            raise LaminaInputError(f"variable '{name}' has dims {ds[name].dims}", f"{label}: {name}",
                                   "dims (angle, wavelength)")
    ds = ds.transpose("angle", "wavelength")
    for dim in ("angle", "wavelength"):
        coord = np.asarray(ds[dim].values, dtype=float)
        if not np.all(np.isfinite(coord)) or np.unique(coord).size != coord.size:
            raise LaminaInputError(f"coordinate '{dim}' has repeated or non-finite values", f"{label}: {dim}",
                                   "distinct finite values")
    ds = ds.sortby(["angle", "wavelength"])
    _check_grid_ranges(ds, label)
    if "delta" in ds:
        ds["delta"] = np.mod(ds["delta"], 360.0)
    for name in ds.data_vars:
        ds[name].attrs = {**variable_attrs(str(name)), **{k: v for k, v in ds[name].attrs.items()
                                                          if k not in ("units", "long_name")}}
    for dim, attrs in (("angle", {"units": "deg"}), ("wavelength", {"units": "nm"})):
        ds[dim].attrs.update(attrs)
    return ds


def _check_grid_ranges(ds, label: str) -> None:
    """Range checks of a gridded dataset; NaN means 'not measured' and is allowed."""
    angle, wavelength = np.meshgrid(ds["angle"].values, ds["wavelength"].values, indexing="ij")
    grids = {"angle": angle, "wavelength": wavelength}

    def fail(name, mask, problem, expected):
        ia, iw = (int(i[0]) for i in np.nonzero(mask))
        value = float(grids[name][ia, iw] if name in grids else ds[name].values[ia, iw])
        raise LaminaInputError(f"{problem} ({name} = {value:g})", f"{label}: {name} at angle {angle[ia, iw]:g} deg, "
                               f"wavelength {wavelength[ia, iw]:g} nm", expected)

    with np.errstate(invalid="ignore"):
        if np.any(wavelength <= 0):
            fail("wavelength", wavelength <= 0, "wavelength is not positive", "positive wavelengths in nm")
        bad_angle = (angle < 0) | (angle >= 90)
        if np.any(bad_angle):
            fail("angle", bad_angle, "angle outside [0, 90)", "angles of incidence 0 <= angle < 90 deg")
        for name in ds.data_vars:
            v = np.asarray(ds[name].values, dtype=float)
            if np.any(np.isinf(v)):
                fail(name, np.isinf(v), "not a finite number", "finite values (NaN where not measured)")
            if name.endswith("_err") and np.any(v <= 0):
                fail(name, v <= 0, "uncertainty not positive", "positive one-sigma uncertainties")
        if "psi" in ds:
            slack = SIGMA_TOLERANCE * np.nan_to_num(ds["psi_err"].values) if "psi_err" in ds else 0.0
            p = ds["psi"].values
            bad = (p < -slack) | (p > 90 + slack)
            if np.any(bad):
                fail("psi", bad, "Psi outside [0, 90]", "Psi in degrees, 0 <= Psi <= 90")
        for q in FRACTIONS:
            if q in ds:
                slack = FRACTION_TOLERANCE
                if error_of(q) in ds:
                    slack = np.maximum(slack, SIGMA_TOLERANCE * np.nan_to_num(ds[error_of(q)].values))
                v = ds[q].values
                bad = (v < -slack) | (v > 1 + slack)
                if np.any(bad):
                    fail(q, bad, f"{q} outside [0, 1]", "a fraction between 0 and 1 (not percent)")


def read_one(path: str | os.PathLike):
    """One measurement file, CSV or NetCDF by its suffix (content sniffed when unclear)."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in (".nc", ".netcdf", ".h5"):
        return read_netcdf(path)
    if suffix in (".csv", ".txt", ".dat", ""):
        return read_csv(path)
    head = _read_bytes(path, "an existing measurement file (.csv or .nc)")[:8]
    if head.startswith(b"\x89HDF") or head.startswith(b"CDF"):
        return read_netcdf(path)
    return read_csv(path)


def read_data(paths):
    """Read one measurement file or several (merged on the union grid) into one Dataset.

    ``read_data("ellips.csv")``; ``read_data(["rt_normal.csv", "ellips.csv"])``.
    """
    if isinstance(paths, (str, os.PathLike)):
        return read_one(paths)
    paths = list(paths)
    if not paths:
        raise LaminaInputError("no measurement file given", None, "one or more files")
    datasets = [read_one(p) for p in paths]
    return datasets[0] if len(datasets) == 1 else merge_data(datasets)


def merge_data(datasets: Iterable):
    """Combine measurement Datasets on the union (angle, wavelength) grid.

    A quantity measured at the same point in two datasets is an error (which
    one is right cannot be decided here); everything else is kept, NaN where
    nothing was measured.  attrs: source_file and sha256 joined by '; ',
    metadata keys kept (differing values joined by ' | ').
    """
    import xarray as xr

    datasets = list(datasets)
    angle = np.unique(np.concatenate([np.asarray(d["angle"].values, float) for d in datasets]))
    wavelength = np.unique(np.concatenate([np.asarray(d["wavelength"].values, float) for d in datasets]))
    names = [v for v in VARIABLE_ORDER if any(v in d.data_vars for d in datasets)]
    merged = {}
    for name in names:
        grid = np.full((angle.size, wavelength.size), np.nan)
        owner = np.full(grid.shape, -1)
        for index, ds in enumerate(datasets):
            if name not in ds.data_vars:
                continue
            part = ds[name].transpose("angle", "wavelength").reindex(angle=angle, wavelength=wavelength).values
            present = np.isfinite(part)
            clash = present & (owner >= 0)
            if clash.any():
                ia, iw = (int(i[0]) for i in np.nonzero(clash))
                other = datasets[int(owner[ia, iw])].attrs.get("source_file", "?")
                raise LaminaInputError(
                    f"{name} at angle {angle[ia]:g} deg, wavelength {wavelength[iw]:g} nm is also in {other}",
                    ds.attrs.get("source_file", f"dataset {index + 1}"), "each point of a quantity in one file only")
            grid[present] = part[present]
            owner[present] = index
        merged[name] = (("angle", "wavelength"), grid, variable_attrs(name))
    out = xr.Dataset(merged, coords=coordinates(angle, wavelength))
    out.attrs = _merged_attrs(datasets)
    return out


def _merged_attrs(datasets: list) -> dict:
    attrs: dict[str, str] = {}
    for key in RESERVED_ATTRS:
        attrs[key] = "; ".join(str(d.attrs.get(key, "")) for d in datasets)
    for ds in datasets:
        for key, value in ds.attrs.items():
            if key in RESERVED_ATTRS:
                continue
            value = str(value)
            if key not in attrs:
                attrs[key] = value
            elif value not in attrs[key].split(" | "):
                attrs[key] = f"{attrs[key]} | {value}"
    return attrs


def describe_dataset(ds) -> list[str]:
    """Human-readable summary lines of a measurement Dataset (used by `lamina inspect`)."""
    lines = []
    wl = ds["wavelength"].values
    an = ds["angle"].values
    lines.append(f"wavelengths: {wl.size} from {wl.min():g} to {wl.max():g} nm" if wl.size else "wavelengths: none")
    lines.append("angles (deg): " + ", ".join(f"{a:g}" for a in an))
    for name in QUANTITIES:
        if name not in ds.data_vars:
            continue
        values = ds[name].values
        measured = np.isfinite(values)
        count = int(measured.sum())
        angles = ", ".join(f"{a:g}" for a, row in zip(an, measured) if row.any())
        err = error_of(name)
        sigma = ""
        if err in ds.data_vars and np.isfinite(ds[err].values).any():
            sigma = f", sigma {np.nanmedian(ds[err].values):.3g} (median)"
        lo, hi = (np.nanmin(values), np.nanmax(values)) if count else (math.nan, math.nan)
        unit = VARIABLES[name][1]
        unit = "" if unit == "1" else f" {unit}"
        lines.append(f"{name:<6s} {count:6d} points at {angles} deg, {lo:.4g} .. {hi:.4g}{unit}{sigma}")
    return lines
