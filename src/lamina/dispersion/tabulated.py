"""The ``table`` law: tabulated n, k interpolated in photon energy.

n and k are interpolated **linearly in photon energy** (not in wavelength and
not as eps1/eps2): dispersion and absorption features are closer to straight
lines on an energy axis, and at the tabulated points the table's own n, k come
back unchanged (common practice).  eps = (n + i k)^2.  Outside the tabulated
range there is no extrapolation: `valid_range_nm` is the table's range, so
asking for a wavelength outside it raises LaminaInputError.

The law has no fit parameters.

Model file, either inline arrays

    law = "table"
    wavelength_nm = [400.0, 500.0, 600.0]
    n = [1.47, 1.46, 1.457]
    k = [0.0, 0.0, 0.0]          # optional, zeros if absent

or a CSV file with columns wavelength_nm, n[, k] (a header line naming them is
optional; lines starting with '#' are comments):

    law = "table"
    file = "nk/film.csv"

A relative ``file`` is taken relative to the model file's folder: `from_toml`
reads that folder from the ``base_dir`` attribute of the `resolve` object the
model-file loader passes (`lamina.stack.modelfile.MaterialResolver`); without
one, relative to the current directory.  `to_toml` writes ``file`` back as it
was given.
"""
from __future__ import annotations

import csv
import os
from pathlib import Path
from typing import Mapping

import numpy as np

from ..errors import LaminaInputError
from ..units import HC_EV_NM
from .base import Dispersion, check_keys


def interpolate_nk(photon_energy_ev, table_energy_ev, table_n, table_k):
    """Complex N at photon energies by linear interpolation of n and k in energy.

    `table_energy_ev` must increase.  Values outside the table are clamped
    (callers check the range first: `Dispersion.check_range`).
    """
    energy = np.asarray(photon_energy_ev, dtype=float)
    n = np.interp(energy, table_energy_ev, table_n)
    k = np.interp(energy, table_energy_ev, table_k)
    return n + 1j * k


def check_table(wavelength_nm, n, k, where: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Validate and sort a table; LaminaInputError names the first bad row (1-based)."""
    arrays = []
    for label, values in (("wavelength_nm", wavelength_nm), ("n", n), ("k", k)):
        try:
            arr = np.asarray(values, dtype=float)
        except (TypeError, ValueError):
            raise LaminaInputError(f"'{label}' holds something that is not a number", f"{where}.{label}",
                                   "a list of numbers") from None
        if arr.ndim != 1:
            raise LaminaInputError(f"'{label}' is not a flat list", f"{where}.{label}", "a list of numbers")
        arrays.append(arr)
    wl, n_arr, k_arr = arrays
    if not (len(wl) == len(n_arr) == len(k_arr)):
        raise LaminaInputError(f"lengths differ: {len(wl)} wavelengths, {len(n_arr)} n, {len(k_arr)} k", where,
                               "equally long wavelength_nm, n and k")
    if len(wl) < 2:
        raise LaminaInputError(f"only {len(wl)} row(s)", where, "at least two tabulated wavelengths")
    for label, arr, ok in (("wavelength_nm", wl, np.isfinite(wl) & (wl > 0)),
                           ("n", n_arr, np.isfinite(n_arr) & (n_arr >= 0)),
                           ("k", k_arr, np.isfinite(k_arr) & (k_arr >= 0))):
        if not ok.all():
            row = int(np.flatnonzero(~ok)[0])
            expected = "a positive number" if label == "wavelength_nm" else "a finite number >= 0"
            raise LaminaInputError(f"{label} = {arr[row]!r} in row {row + 1}", f"{where}.{label}", expected)
    order = np.argsort(wl, kind="stable")
    wl, n_arr, k_arr = wl[order], n_arr[order], k_arr[order]
    dup = np.flatnonzero(np.diff(wl) == 0)
    if dup.size:
        raise LaminaInputError(f"wavelength {wl[dup[0]]:g} nm appears twice", f"{where}.wavelength_nm",
                               "each wavelength once")
    return wl, n_arr, k_arr


def read_nk_csv(path: str | os.PathLike, where: str | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Read wavelength_nm, n[, k] columns from a CSV file (header optional, '#' comments)."""
    path = Path(path)
    label = where or str(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise LaminaInputError(f"file '{path}' not found", label, "an existing CSV file of wavelength_nm, n, k") \
            from None
    except (OSError, UnicodeDecodeError) as exc:
        raise LaminaInputError(f"cannot read '{path}': {exc}", label, "a readable UTF-8 CSV file") from None
    rows = []
    header_seen = False
    extra_width = 0
    for line_no, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        cells = [c.strip() for c in next(csv.reader([stripped]))]
        if not rows and not header_seen and _is_header(cells):
            header_seen = True
            # a header that names more columns after wavelength_nm, n, k (e.g. the n_err, k_err of
            # `lamina invert`'s nk.csv): those extra columns are allowed and ignored
            extra_width = len(cells) if len(cells) > 3 and [c.lower() for c in cells[:3]] == ["wavelength_nm", "n", "k"] \
                else 0
            continue
        if len(cells) not in (2, 3) and not (header_seen and extra_width and len(cells) == extra_width):
            raise LaminaInputError(f"{len(cells)} columns", f"{path}:{line_no}", "wavelength_nm, n[, k]")
        try:
            values = [float(c) for c in cells[:3]]
        except ValueError:
            raise LaminaInputError(f"'{line.strip()}' is not numbers", f"{path}:{line_no}",
                                   "numbers: wavelength_nm, n[, k]") from None
        rows.append((values + [0.0])[:3] + [line_no])
    if len(rows) < 2:
        raise LaminaInputError(f"{len(rows)} data row(s)", str(path), "at least two rows of wavelength_nm, n[, k]")
    data = np.array(rows)
    bad = ~(np.isfinite(data[:, :3]).all(axis=1) & (data[:, 0] > 0) & (data[:, 1] >= 0) & (data[:, 2] >= 0))
    if bad.any():
        row = data[np.flatnonzero(bad)[0]]
        raise LaminaInputError(f"row {row[0]:g}, {row[1]:g}, {row[2]:g} is not physical", f"{path}:{int(row[3])}",
                               "wavelength_nm > 0, n >= 0, k >= 0")
    return check_table(data[:, 0], data[:, 1], data[:, 2], str(path))


def _is_header(cells) -> bool:
    try:
        [float(c) for c in cells]
    except ValueError:
        return True
    return False


class Table(Dispersion):
    """Tabulated n, k (wavelength_nm ascending) interpolated linearly in photon energy."""

    law = "table"
    BACKGROUND = None
    SPECS: dict = {}
    #: (wavelength grid, N on it) of the last `nk` call; replaced, never mutated (copies share it safely)
    _nk_cache = None

    def __init__(self, wavelength_nm, n, k=None, *, file: str | None = None, where: str = "table", **meta):
        k = np.zeros(np.shape(n)) if k is None else k
        wl, n_arr, k_arr = check_table(wavelength_nm, n, k, where)
        self.wavelength_nm, self.n_values, self.k_values = wl, n_arr, k_arr
        #: the ``file`` value of the model file (written back by to_toml), or None
        self.file = file
        # ascending energies for np.interp: the reversed wavelength order
        self._energy_ev = HC_EV_NM / wl[::-1]
        meta.setdefault("valid_range_nm", (float(wl[0]), float(wl[-1])))
        super().__init__({}, {}, **meta)

    def _epsilon(self, photon_energy_ev, p):
        # no clamping at the table ends, whichever way the law is called (components of
        # mixtures are evaluated in photon energy, past Dispersion.epsilon's range check)
        energy = np.asarray(photon_energy_ev, dtype=float)
        if energy.size:
            with np.errstate(divide="ignore"):
                self.check_range(HC_EV_NM / energy)
        n_complex = interpolate_nk(photon_energy_ev, self._energy_ev, self.n_values[::-1], self.k_values[::-1])
        return n_complex * n_complex

    def nk(self, wavelength_nm, values: Mapping[str, object] | None = None) -> np.ndarray:
        """N = n + ik interpolated directly (no square and square root back), cached per grid.

        A fit asks for the same wavelengths at every evaluation and the law has
        no parameters, so the interpolation is done once per grid (compared by
        contents, ~1 us).  Equal to `Dispersion.nk` to round-off (sqrt(N^2) = N
        for n > 0, k >= 0).  A copy is returned: callers may modify it.
        """
        if values:  # the base class reports the unknown parameter names
            return super().nk(wavelength_nm, values)
        wavelength = np.asarray(wavelength_nm, dtype=float)
        cached = self._nk_cache
        if cached is not None and cached[0].shape == wavelength.shape and np.array_equal(cached[0], wavelength):
            return cached[1].copy()
        self.check_range(wavelength)
        n_complex = np.asarray(interpolate_nk(HC_EV_NM / wavelength, self._energy_ev, self.n_values[::-1],
                                              self.k_values[::-1]))
        self._nk_cache = (wavelength.copy(), n_complex)
        return n_complex.copy()

    @classmethod
    def from_csv(cls, path, where: str | None = None, file: str | None = None, **meta) -> "Table":
        wl, n, k = read_nk_csv(path, where)
        return cls(wl, n, k, file=file, where=where or str(path), **meta)

    @classmethod
    def from_toml(cls, table, where, resolve=None):
        check_keys(table, {"law", "file", "wavelength_nm", "n", "k"}, where)
        if "file" in table:
            extra = sorted({"wavelength_nm", "n", "k"} & set(table))
            if extra:
                raise LaminaInputError(f"both 'file' and '{extra[0]}'", f"{where}.{extra[0]}",
                                       "either file = \"...\" or inline wavelength_nm, n, k")
            name = table["file"]
            if not isinstance(name, str) or not name:
                raise LaminaInputError(f"file = {name!r} is not a path", f"{where}.file", "a file name in quotes")
            path = Path(name)
            base_dir = getattr(resolve, "base_dir", None)
            if not path.is_absolute() and base_dir is not None:
                path = Path(base_dir) / path
            return cls.from_csv(path, f"{where}.file ('{path}')", file=name)
        for key in ("wavelength_nm", "n"):
            if key not in table:
                raise LaminaInputError(f"missing key '{key}'", where,
                                       "file = \"...\" or inline wavelength_nm, n (and k) lists")
        return cls(table["wavelength_nm"], table["n"], table.get("k"), where=where)

    def to_toml(self):
        if self.file is not None:
            return {"law": self.law, "file": self.file}
        return {"law": self.law, "wavelength_nm": [float(x) for x in self.wavelength_nm],
                "n": [float(x) for x in self.n_values], "k": [float(x) for x in self.k_values]}
