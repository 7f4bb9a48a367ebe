"""Weighted residuals of a model against measured spectra, for batches of parameter sets.

A fit problem is a list of *blocks*: one measurement dataset together with the
stack of the sample it was measured on.  Each block knows which of its
stack's parameters move during the fit and which public fit parameter drives
each of them, the measured points (NaN points skipped), their one-sigma
uncertainties, and the complex indices of every medium whose parameters are
all fixed (computed once per fit: tabulated substrates are not re-interpolated
on every call).

Residual of a point: (model - data) / sigma, where for Delta the difference is
first wrapped into (-180, 180] degrees (Delta is an angle, 359 and 1 are 2
degrees apart).  Sigma is the data's ``<quantity>_err`` value when given,
otherwise the default of `DEFAULT_SIGMA` (see docs/fitting.md).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import LaminaInputError
from .parameters import ParameterTable

#: quantities a fit compares, in this order
QUANTITIES = ("psi", "delta", "R", "T")
#: one-sigma defaults when the data carry no ``_err`` column (common practice for a
#: modern spectroscopic ellipsometer / spectrophotometer; see docs/fitting.md)
DEFAULT_SIGMA = {"psi": 0.02, "delta": 0.05, "R": 0.002, "T": 0.002}
UNITS = {"psi": "deg", "delta": "deg", "R": "", "T": ""}
#: upper bound on batch members x angles x wavelengths per solver call (memory)
MAX_BATCH_POINTS = 400_000


def wrap_degrees(difference):
    """Angle difference wrapped into (-180, 180] degrees."""
    return 180.0 - np.mod(180.0 - np.asarray(difference, dtype=float), 360.0)


@dataclass
class Block:
    """One dataset measured on one sample, with what is needed to model it fast."""

    sample: str
    label: str
    stack: object
    wavelength_nm: np.ndarray
    angle_deg: np.ndarray
    quantities: list
    #: per quantity: (angle index, wavelength index) of the measured points
    index: dict
    data: np.ndarray
    sigma: np.ndarray
    quantity_code: np.ndarray
    #: stack full name -> public fit-parameter name, for parameters that move
    drivers: dict = field(default_factory=dict)
    trusted_errors: bool = True
    _fixed_n: list | None = None
    instrument: object = None
    sha256: str | None = None

    @property
    def n_points(self) -> int:
        return int(self.data.size)

    # -- modelling ---------------------------------------------------------------
    def _media(self):
        stack = self.stack
        media = [("ambient", stack.ambient)] + [(layer.name, layer.material) for layer in stack.layers]
        media.append(("substrate", stack.substrate))
        if stack.substrate_thickness_mm is not None:
            exit_medium = stack.exit
            if exit_medium is None:
                from ..dispersion.constant import Constant
                exit_medium = Constant(1.0, 0.0, name="air")
            media.append(("exit", exit_medium))
        return media

    def prepare(self) -> None:
        """Check wavelength ranges and cache indices of media that never change."""
        try:
            self.stack.check_range(self.wavelength_nm)
        except LaminaInputError as exc:
            raise LaminaInputError(exc.problem, f"{self.label}: {exc.where}" if exc.where else self.label,
                                   exc.expected) from None
        moving_owners = {name.partition(".")[0] for name in self.drivers if ".material." in name}
        self._fixed_n = [None if owner in moving_owners else material.nk(self.wavelength_nm)
                         for owner, material in self._media()]

    def optical_inputs(self, stack_values: dict, batch: int):
        """n_media, thickness_nm, coherent with (B, W) / (B,) entries where parameters move."""
        material_values: dict[str, dict] = {}
        thickness_values: dict[str, object] = {}
        for full, value in stack_values.items():
            owner, _, rest = full.partition(".")
            if rest == "thickness_nm":
                thickness_values[owner] = value
            else:
                material_values.setdefault(owner, {})[rest[len("material."):]] = value
        n_media = []
        for (owner, material), fixed in zip(self._media(), self._fixed_n):
            if fixed is not None:
                n_media.append(fixed)
            else:
                n = material.nk(self.wavelength_nm, material_values.get(owner))
                n_media.append(np.broadcast_to(n, (batch, self.wavelength_nm.size)) if n.ndim == 1 else n)
        thickness, coherent = [], []
        for layer in self.stack.layers:
            value = thickness_values.get(layer.name, layer.thickness_nm.value)
            thickness.append(np.asarray(value, dtype=float) if np.ndim(value) else float(value))
            coherent.append(layer.coherent)
        if self.stack.substrate_thickness_mm is not None:
            thickness.append(self.stack.substrate_thickness_mm * 1e6)
            coherent.append(False)
        return n_media, thickness, coherent

    def simulate(self, stack_values: dict, batch: int) -> dict:
        """Quantity -> (B, A, W) arrays for a batch of parameter sets."""
        if self.instrument is not None:
            from ..optics.simulate import simulate
            values = {k: np.broadcast_to(np.asarray(v, dtype=float), (batch,)) for k, v in stack_values.items()}
            ds = simulate(self.stack, wavelength_nm=self.wavelength_nm, angle_deg=self.angle_deg,
                          instrument=self.instrument, values=values or None)
            out = {}
            for q in self.quantities:
                arr = ds[q].transpose(*([d for d in ("batch",) if d in ds[q].dims] + ["angle", "wavelength"]))
                out[q] = np.broadcast_to(arr.values, (batch,) + arr.shape[-2:])
            return out
        from ..optics import solve
        n_media, thickness, coherent = self.optical_inputs(stack_values, batch)
        result = solve(n_media, thickness, coherent, self.wavelength_nm, self.angle_deg)
        shape = (batch, self.angle_deg.size, self.wavelength_nm.size)
        return {q: np.broadcast_to(result[q], shape) for q in self.quantities}

    def model_points(self, public_values: dict, batch: int) -> np.ndarray:
        """(B, P) model values at the measured points, in the order of `data`."""
        stack_values = {full: public_values[public] for full, public in self.drivers.items()}
        stack_values = {k: np.broadcast_to(np.asarray(v, dtype=float), (batch,)) for k, v in stack_values.items()}
        out = np.empty((batch, self.n_points))
        step = max(1, MAX_BATCH_POINTS // max(1, self.angle_deg.size * self.wavelength_nm.size))
        for start in range(0, batch, step):
            stop = min(batch, start + step)
            chunk = {k: v[start:stop] for k, v in stack_values.items()}
            sim = self.simulate(chunk, stop - start)
            out[start:stop] = np.concatenate([sim[q][:, ai, wi] for q, (ai, wi) in self.index.items()], axis=1)
        return out

    def weighted_residuals(self, model: np.ndarray) -> np.ndarray:
        return self.raw_residuals(model) / self.sigma

    def raw_residuals(self, model: np.ndarray) -> np.ndarray:
        diff = model - self.data
        delta = self.quantity_code == QUANTITIES.index("delta")
        if delta.any():
            diff[..., delta] = wrap_degrees(diff[..., delta])
        return diff


def _grid(array) -> np.ndarray:
    """(angle, wavelength) float array of a DataArray (transposed only when needed)."""
    if array.dims != ("angle", "wavelength"):
        array = array.transpose("angle", "wavelength")
    return np.asarray(array.values, dtype=float)


def make_block(sample: str, dataset, stack, label: str | None = None) -> Block:
    """A block from an xarray Dataset with dims (angle, wavelength)."""
    label = label or str(dataset.attrs.get("source_file", sample or "data"))
    for dim in ("angle", "wavelength"):
        if dim not in dataset.dims:
            raise LaminaInputError(f"dataset has no '{dim}' dimension", label, "dims (angle, wavelength)")
    quantities = [q for q in QUANTITIES if q in dataset.data_vars]
    grids = {q: _grid(dataset[q]) for q in quantities}
    measured = {q: np.isfinite(g) for q, g in grids.items()}
    quantities = [q for q in quantities if measured[q].any()]
    if not quantities:
        raise LaminaInputError("no measured psi, delta, R or T values", label, "at least one measured quantity")
    any_measured = np.logical_or.reduce([measured[q] for q in quantities])
    keep_angle = any_measured.any(axis=1)
    keep_wl = any_measured.any(axis=0)
    angle_deg = np.asarray(dataset["angle"].values, dtype=float)[keep_angle]
    wavelength_nm = np.asarray(dataset["wavelength"].values, dtype=float)[keep_wl]
    index, data, sigma, code = {}, [], [], []
    trusted = True
    for q in quantities:
        grid = grids[q][np.ix_(keep_angle, keep_wl)]
        ai, wi = np.nonzero(np.isfinite(grid))
        index[q] = (ai, wi)
        data.append(grid[ai, wi])
        err_name = f"{q}_err"
        if err_name in dataset.data_vars:
            err = _grid(dataset[err_name])
            err = err[np.ix_(keep_angle, keep_wl)][ai, wi]
            bad = np.isfinite(err) & (err <= 0)
            if bad.any():
                raise LaminaInputError(f"{err_name} has {int(bad.sum())} values <= 0", f"{label}: {err_name}",
                                       "positive one-sigma uncertainties")
            missing = ~np.isfinite(err)
            if missing.any():
                trusted = False
                err = np.where(missing, DEFAULT_SIGMA[q], err)
        else:
            trusted = False
            err = np.full(ai.size, DEFAULT_SIGMA[q])
        sigma.append(err)
        code.append(np.full(ai.size, QUANTITIES.index(q)))
    return Block(sample=sample, label=label, stack=stack, wavelength_nm=wavelength_nm, angle_deg=angle_deg,
                 quantities=quantities, index=index, data=np.concatenate(data), sigma=np.concatenate(sigma),
                 quantity_code=np.concatenate(code), trusted_errors=trusted,
                 sha256=dataset.attrs.get("sha256"))


class Problem:
    """All blocks and the parameter table: residuals for (B, F) batches of free values."""

    def __init__(self, table: ParameterTable, blocks: list[Block]):
        self.table = table
        self.blocks = blocks
        for block in blocks:
            block.prepare()
        self.n_points = sum(b.n_points for b in blocks)
        self.n_free = len(table.free)
        #: number of single-parameter-set model evaluations so far (a batch of B counts B)
        self.n_evaluations = 0
        self.sigma = np.concatenate([b.sigma for b in blocks])
        self.trusted_errors = all(b.trusted_errors for b in blocks)

    def model(self, free_values) -> np.ndarray:
        """(B, P) model values for free values of shape (B, F) (or (F,) -> (1, P))."""
        x = np.atleast_2d(np.asarray(free_values, dtype=float))
        batch = x.shape[0]
        public = self.table.values(x)
        self.n_evaluations += batch
        return np.concatenate([b.model_points(public, batch) for b in self.blocks], axis=1)

    def residuals(self, free_values) -> np.ndarray:
        """(B, P) weighted residuals; NaN model values (solver trouble) become large finite numbers."""
        model = self.model(free_values)
        parts, start = [], 0
        for b in self.blocks:
            parts.append(b.weighted_residuals(model[:, start:start + b.n_points]))
            start += b.n_points
        res = np.concatenate(parts, axis=1)
        return np.where(np.isfinite(res), res, 1e6)

    def chi2(self, free_values) -> np.ndarray:
        res = self.residuals(free_values)
        return np.einsum("bp,bp->b", res, res)
