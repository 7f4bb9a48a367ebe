"""Drift diagnosis: which layer of a coated part is off, and by how much.

The measured spectrum of a part is fitted starting from the recipe, with
every layer thickness free and everything else fixed:

1. pre-fit of one common thickness scale s (all layers t_j = s * t_j,design):
   a batched scan of s over 0.80 .. 1.20 in one simulate call, then a
   bounded 1-D refinement around the best grid point.  A run that is
   uniformly thick or thin is found here, and the layer fit then starts near
   its answer (thin-film spectra have many local minima in thickness: common
   practice);
2. `lamina.fit` with the layer thicknesses free (bounds 0.5 .. 1.5 x design
   by default), global search off unless asked for.

Reported per layer: design, fitted, stderr (the fit's 1-sigma), deviation in
nm and percent, largest |percent| first.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.optimize import minimize_scalar

from ..errors import LaminaInputError
from ..parameters import Param

#: one-sigma defaults for the pre-fit when the data carry no _err (same role
#: as the fitting engine's defaults; common practice, from memory)
PREFIT_SIGMA = {"psi": 0.02, "delta": 0.05, "R": 0.002, "T": 0.002}
SCALE_GRID = np.linspace(0.80, 1.20, 161)


def free_thickness_stack(stack, bounds=(0.5, 1.5), scale: float = 1.0):
    """The recipe with every layer thickness free (scaled by `scale`) and every other parameter fixed."""
    params = {}
    for name, prm in stack.parameters().items():
        if name.endswith(".thickness_nm") and stack.layer(name.rsplit(".", 1)[0]) is not None:
            design = prm.value
            params[name] = Param(design * scale, min=design * bounds[0], max=max(design * bounds[1], 1e-3),
                                 vary=True, unit="nm")
        elif prm.vary or prm.expr is not None:
            params[name] = Param(prm.value, unit=prm.unit)
    return stack.with_params(params)


def _measured_quantities(data) -> list[str]:
    present = [q for q in ("psi", "delta", "R", "T") if q in data.data_vars and np.isfinite(data[q].values).any()]
    if not present:
        raise LaminaInputError("no psi, delta, R or T values", data.attrs.get("source_file", "measured data"),
                               "a measured spectrum")
    return present


def _chi2(simulated, data, quantities) -> np.ndarray:
    """Chi-square (B,) of batched simulated spectra against the data (NaN points skipped)."""
    total = 0.0
    for q in quantities:
        measured = data[q].transpose("angle", "wavelength").values
        err_name = f"{q}_err"
        sigma = (data[err_name].transpose("angle", "wavelength").values if err_name in data.data_vars
                 else np.full(measured.shape, PREFIT_SIGMA[q]))
        model = simulated[q].transpose("batch", "angle", "wavelength").values
        diff = model - measured[None]
        if q == "delta":
            diff = 180.0 - np.mod(180.0 - diff, 360.0)  # Delta is an angle: wrap to (-180, 180]
        ok = np.isfinite(measured) & np.isfinite(sigma) & (sigma > 0)
        total = total + np.where(ok[None], (diff / np.where(ok, sigma, 1.0)[None]) ** 2, 0.0).sum(axis=(1, 2))
    return np.asarray(total)


def prefit_scale(stack, data) -> float:
    """Common thickness scale that best matches the data (grid scan, then bounded refinement)."""
    from ..optics.simulate import simulate

    quantities = _measured_quantities(data)
    wavelength = np.asarray(data["wavelength"].values, dtype=float)
    angle = np.asarray(data["angle"].values, dtype=float)
    names = [f"{layer.name}.thickness_nm" for layer in stack.layers]
    design = np.array([layer.thickness_nm.value for layer in stack.layers])

    def chi2_of(scales):
        scales = np.atleast_1d(scales)
        values = {n: scales * t for n, t in zip(names, design)}
        return _chi2(simulate(stack, wavelength_nm=wavelength, angle_deg=angle, values=values), data, quantities)

    grid_chi2 = chi2_of(SCALE_GRID)
    best = int(np.argmin(grid_chi2))
    step = SCALE_GRID[1] - SCALE_GRID[0]
    lo, hi = SCALE_GRID[max(best - 1, 0)], SCALE_GRID[min(best + 1, SCALE_GRID.size - 1)]
    if hi - lo < step / 2:
        return float(SCALE_GRID[best])
    refined = minimize_scalar(lambda s: float(chi2_of(s)[0]), bounds=(lo, hi), method="bounded",
                              options={"xatol": 1e-6})
    return float(refined.x) if refined.fun <= grid_chi2[best] else float(SCALE_GRID[best])


def diagnose_drift(stack, data, prefit: bool = True, global_search: bool = False, **fit_options) -> dict:
    """Fit the layer thicknesses of a measured part and report deviations from the recipe."""
    from .. import fit as run_fit

    if not stack.layers:
        raise LaminaInputError("the recipe has no layers", "recipe", "at least one layer")
    scale = prefit_scale(stack, data) if prefit else 1.0
    start = free_thickness_stack(stack, scale=scale)
    result = run_fit(start, data, global_search=global_search, **fit_options)
    fitted = result.to_dict()
    parameters = fitted["parameters"]
    rows = {}
    for layer in stack.layers:
        name = f"{layer.name}.thickness_nm"
        design = float(layer.thickness_nm.value)
        value = float(parameters[name]["value"])
        stderr = parameters[name].get("stderr")
        stderr = None if stderr is None or not math.isfinite(float(stderr)) else float(stderr)
        delta = value - design
        rows[name] = {"design": design, "fitted": value, "stderr": stderr, "delta_nm": delta,
                      "delta_pct": 100.0 * delta / design if design > 0 else None}
    order = sorted(rows, key=lambda n: abs(rows[n]["delta_pct"] or 0.0), reverse=True)
    return {
        "drift": {name: rows[name] for name in order},
        "largest": order[0],
        "prefit_scale": scale,
        "fit": {"converged": fitted.get("converged"), "statistics": fitted.get("statistics", {}),
                "warnings": fitted.get("warnings", [])},
        "fitted_stack": getattr(result, "stack", None),
    }
