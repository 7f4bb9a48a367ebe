"""The fit: weighted least squares of a stack's free parameters against spectra.

``fit(stack, data, global_search=False)``:

1. `samples.build` pairs data with samples, builds the parameter table (public
   dotted names, bounds, ties) and the blocks (objective.py);
2. optionally `global_search.candidates` proposes starting points;
3. each start is refined by lmfit's ``least_squares`` method (scipy's
   trust-region reflective algorithm, which honours bounds) with a Jacobian
   from batched forward differences: all perturbed parameter sets go through
   the solver in one call;
4. uncertainties, correlations, warnings and the fitted stack are assembled
   into a `FitResult` (uncertainty.py, result.py).
"""
from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass

import numpy as np

from ..errors import LaminaInputError
from . import global_search as _global
from .objective import QUANTITIES, UNITS
from .result import FitResult
from .samples import Sample, build, parse_samples
from .uncertainty import central_jacobian, correlations, covariance, forward_jacobian, interval90, tied_stderr

#: a fit whose reduced chi-square exceeds this is reported as not converged
DEFAULT_MAX_REDUCED_CHI2 = 100.0
#: correlation magnitude above which a pair of parameters is flagged
CORRELATION_WARNING = 0.95
#: reduced chi-square outside this range draws a warning
REDUCED_CHI2_RANGE = (0.3, 3.0)


@dataclass
class LocalOutcome:
    x: np.ndarray
    chi2: float
    success: bool
    message: str
    iterations: int


def fit(stack, data, global_search: bool = False, *, samples: list[Sample] | None = None,
        max_reduced_chi2: float = DEFAULT_MAX_REDUCED_CHI2, max_nfev: int | None = None,
        model_label: str | None = None, seed: int = 0) -> FitResult:
    """Fit every free parameter of `stack` to `data` at once.

    data: an xarray Dataset (dims angle, wavelength; variables psi, delta, R, T,
    optional ``*_err``), a list of them (measured on the same sample, e.g.
    ellipsometry + R/T; or one per sample when the stack lists ``[[samples]]``),
    or a dict {sample name: Dataset or list}.  See docs/fitting.md.
    """
    if samples is None:
        samples = parse_samples(stack)
    problem = build(stack, data, samples)
    table = problem.table
    lo, hi = table.bounds()
    for name, a, b in zip(table.free, lo, hi):
        if not a < b:
            raise LaminaInputError(f"min = max = {a:g} leaves no room to vary", name,
                                   "min < max, or a fixed value (vary = false)")
    x0 = table.start_vector()
    starts, search_info = ([x0], None)
    if global_search:
        starts, search_info = _global.candidates(problem, x0, seed=seed)
    best = None
    for start in starts:
        outcome = local_fit(problem, start, max_nfev)
        if best is None or outcome.chi2 < best.chi2:
            best = outcome
    return summarize(problem, best, stack, samples, max_reduced_chi2, model_label, search_info)


def local_fit(problem, x_start: np.ndarray, max_nfev: int | None = None) -> LocalOutcome:
    """Trust-region reflective least squares from `x_start` (lmfit 'least_squares')."""
    import lmfit
    table = problem.table
    lo, hi = table.bounds()
    params = table.to_lmfit()
    safe = [table.items[n].safe for n in table.free]
    for name, value in zip(safe, np.clip(x_start, lo, hi)):
        params[name].value = float(value)
    cache: dict = {}

    def free_vector(p) -> np.ndarray:
        return np.array([p[s].value for s in safe], dtype=float)

    def residual(p):
        x = free_vector(p)
        r = problem.residuals(x)[0]
        cache["x"], cache["r"] = x, r
        return r

    def jacobian(p, *args, **kwargs):
        x = free_vector(p)
        base = cache["r"] if "x" in cache and np.array_equal(cache["x"], x) else problem.residuals(x)[0]
        return forward_jacobian(problem.residuals, x, base, hi)

    minimizer = lmfit.Minimizer(residual, params)
    out = minimizer.minimize(method="least_squares", jac=jacobian, x_scale="jac",
                             max_nfev=max_nfev or 100 * (len(safe) + 1))
    x = free_vector(out.params)
    chi2 = float(np.sum(problem.residuals(x)[0] ** 2))
    message = str(getattr(out, "message", ""))
    success = bool(getattr(out, "success", False)) and not getattr(out, "aborted", False)
    return LocalOutcome(x, chi2, success, message, int(getattr(out, "nfev", 0)))


# -- assembling the result -----------------------------------------------------------

def summarize(problem, best: LocalOutcome, stack, samples, max_reduced_chi2, model_label,
              search_info) -> FitResult:
    table = problem.table
    x = best.x
    lo, hi = table.bounds()
    residuals = problem.residuals(x)[0]
    chi2 = float(residuals @ residuals)
    dof = problem.n_points - problem.n_free
    reduced = chi2 / dof if dof > 0 else float("nan")
    jac = central_jacobian(problem.residuals, x, lo, hi)
    cov, undetermined = covariance(jac)
    scaled = not problem.trusted_errors and dof > 0
    if scaled:
        cov = cov * reduced
    stderr = np.sqrt(np.diag(cov))
    values = table.values(x[None, :])
    warnings: list[str] = []
    parameters = _parameter_entries(table, x, stderr, lo, hi, values, cov, warnings)
    corr = correlations(cov)
    correlation_dict = _correlation_entries(table.free, corr, warnings)
    for i in undetermined:
        warnings.append(f"{table.free[i]} is not determined by the data (no sensitivity or fully "
                        "correlated); its uncertainty is unknown")
    statistics = _statistics(problem, residuals, chi2, reduced)
    converged, message = _verdict(best, reduced, dof, max_reduced_chi2, problem.trusted_errors, scaled,
                                  search_info)
    _chi2_warning(reduced, problem.trusted_errors, warnings)
    fitted_stack, fitted_samples = _fitted_stack(stack, samples, parameters)
    return FitResult(
        success=converged, message=message, stack=fitted_stack, parameters=parameters,
        correlations=correlation_dict, statistics=statistics, warnings=warnings,
        provenance=_provenance(problem, stack, model_label), residuals=residuals,
        outputs_factory=lambda: _model_outputs(problem, x, residuals),
        free_names=list(table.free), covariance=cov, samples=fitted_samples,
        n_evaluations=problem.n_evaluations, materials=_fitted_materials(problem, fitted_stack, fitted_samples),
    )


def _at_bound(value: float, lower: float, upper: float) -> bool:
    span = upper - lower if np.isfinite(upper - lower) else max(1.0, abs(value))
    tol = 1e-6 * span
    return bool((np.isfinite(lower) and value - lower <= tol) or (np.isfinite(upper) and upper - value <= tol))


def _parameter_entries(table, x, stderr, lo, hi, values, cov, warnings) -> dict:
    entries = {}
    tied_err = tied_stderr(table, x, cov)
    free_index = {n: j for j, n in enumerate(table.free)}
    for name, item in table.items.items():
        if name in free_index:
            j = free_index[name]
            value, err, lower, upper = float(x[j]), float(stderr[j]), float(lo[j]), float(hi[j])
            at_bound = _at_bound(value, lower, upper)
            if at_bound:
                side = "lower" if abs(value - lower) <= abs(upper - value) else "upper"
                warnings.append(f"{name} = {value:.6g} ended at its {side} bound; the model or the bounds "
                                "may be wrong and its uncertainty is not meaningful")
            entries[name] = {"value": value, "stderr": err, "ci90": list(interval90(value, err, lower, upper)),
                             "min": lower, "max": upper, "vary": True, "at_bound": at_bound, "unit": item.unit}
        elif item.param.expr is not None:
            value = float(np.ravel(values[name])[0])
            err = tied_err.get(name, float("nan"))
            entries[name] = {"value": value, "stderr": err,
                             "ci90": list(interval90(value, err, -math.inf, math.inf)),
                             "min": item.param.min, "max": item.param.max, "vary": False, "at_bound": False,
                             "unit": item.unit, "expr": item.param.expr}
    return entries


def _correlation_entries(names, corr, warnings) -> dict:
    out = {}
    for i, a in enumerate(names):
        out[a] = {b: (round(float(corr[i, j]), 4) if np.isfinite(corr[i, j]) else None)
                  for j, b in enumerate(names) if j != i}
        for j in range(i + 1, len(names)):
            if np.isfinite(corr[i, j]) and abs(corr[i, j]) > CORRELATION_WARNING:
                warnings.append(f"{a} and {names[j]} are strongly correlated (r = {corr[i, j]:+.3f}); "
                                "the data hardly tell them apart")
    return out


def _statistics(problem, residuals, chi2, reduced) -> dict:
    # raw differences back from the weighted residuals (model - data = r * sigma, Delta already wrapped)
    diff = residuals * problem.sigma
    code = np.concatenate([block.quantity_code for block in problem.blocks])
    rms: dict = {}
    for k, q in enumerate(QUANTITIES):
        sel = code == k
        if sel.any():
            rms[q] = float(np.sqrt(np.mean(diff[sel] ** 2)))
    return {"chi2": chi2, "reduced_chi2": reduced, "n_points": int(problem.n_points),
            "n_free": int(problem.n_free), "rms": rms}


def _verdict(best, reduced, dof, max_reduced_chi2, trusted, scaled, search_info) -> tuple[bool, str]:
    parts = []
    converged = best.success and math.isfinite(best.chi2)
    if not best.success:
        parts.append(f"the optimizer stopped without converging ({best.message.strip()})")
    elif dof > 0 and reduced > max_reduced_chi2:
        converged = False
        parts.append(f"no acceptable fit: reduced chi-square {reduced:.4g} exceeds {max_reduced_chi2:g}; "
                     "the model cannot describe the data (wrong structure, materials or bounds?)")
    else:
        parts.append(f"fit converged ({best.message.strip() or 'optimizer finished'})")
    if search_info:
        parts.append(f"global search over {', '.join(search_info.get('scanned', [])) or 'bounded parameters'} "
                     f"({search_info.get('mode', 'evolution')}, {search_info.get('points', 0)} points)")
    if trusted:
        parts.append("uncertainties from the covariance with the data's own sigmas, not scaled by "
                     "reduced chi-square (the stated errors are trusted; reduced chi-square tests the model)")
    elif scaled:
        parts.append("default sigmas assumed (no _err columns): covariance scaled by reduced chi-square "
                     f"{reduced:.4g}, since the true noise level is unknown")
    else:
        parts.append("no degrees of freedom left: uncertainties not scaled")
    return converged, "; ".join(parts)


def _chi2_warning(reduced, trusted, warnings) -> None:
    low, high = REDUCED_CHI2_RANGE
    if not math.isfinite(reduced) or low <= reduced <= high:
        return
    if trusted:
        why = ("the model misses features of the data or the stated errors are too small" if reduced > high
               else "the stated errors are larger than the scatter of the data")
    else:
        why = ("the default sigmas are smaller than the misfit; uncertainties were scaled by it" if reduced > high
               else "the default sigmas are larger than the scatter; uncertainties were scaled by it")
    warnings.append(f"reduced chi-square is {reduced:.3g}, far from 1: {why}")


def _fitted_stack(stack, samples, parameters):
    shared = {name: entry["value"] for name, entry in parameters.items() if name in stack.parameters()}
    fitted = stack.with_values(shared)
    fitted_samples = []
    for sample in samples or []:
        overrides = {}
        for full, prm in sample.overrides.items():
            entry = parameters.get(f"{sample.name}.{full}")
            overrides[full] = prm.with_value(entry["value"]) if entry else prm
        fitted_samples.append(Sample(sample.name, overrides, list(sample.data)))
    raw = stack.extras.get("samples")
    if isinstance(raw, list) and fitted_samples:
        by_name = {s.name: s for s in fitted_samples}
        new_raw = []
        for entry in raw:
            entry = dict(entry)
            s = by_name.get(entry.get("name"))
            if s is not None and "overrides" in entry:
                entry["overrides"] = {full: prm.to_toml() for full, prm in s.overrides.items()}
            new_raw.append(entry)
        fitted.extras = dict(fitted.extras, samples=new_raw)
    return fitted, fitted_samples


def _model_outputs(problem, x, residuals):
    import pandas as pd
    import xarray as xr
    public = problem.table.values(x[None, :])
    datasets, rows, start = [], [], 0
    for block in problem.blocks:
        stack_values = {full: np.ravel(public[p])[:1] for full, p in block.drivers.items()}
        sim = block.simulate(stack_values, 1)
        ds = xr.Dataset({q: (("angle", "wavelength"), np.array(sim[q][0])) for q in block.quantities},
                        coords={"angle": block.angle_deg, "wavelength": block.wavelength_nm})
        ds["angle"].attrs["units"] = "deg"
        ds["wavelength"].attrs["units"] = "nm"
        for q in block.quantities:
            ds[q].attrs["units"] = UNITS[q]
        ds.attrs.update(sample=block.sample, source_file=block.label)
        datasets.append(ds)
        model = np.concatenate([sim[q][0][ai, wi] for q, (ai, wi) in block.index.items()])
        raw = block.raw_residuals(model)
        angle = np.concatenate([block.angle_deg[ai] for ai, _ in block.index.values()])
        wavelength = np.concatenate([block.wavelength_nm[wi] for _, wi in block.index.values()])
        rows.append(pd.DataFrame({
            "sample": block.sample, "angle_deg": angle, "wavelength_nm": wavelength,
            "quantity": [QUANTITIES[c] for c in block.quantity_code], "data": block.data, "model": model,
            "residual": raw, "sigma": block.sigma,
        }))
        rows[-1].attrs["block"] = len(rows) - 1
        start += block.n_points
    points = pd.concat(rows, ignore_index=True)
    points.attrs["block_sizes"] = [len(r) for r in rows]
    return datasets, points


def _provenance(problem, stack, model_label) -> dict:
    from .. import __version__
    sha = {}
    for block in problem.blocks:
        ds_sha = getattr(block, "sha256", None)
        sha[block.label] = ds_sha
    return {"lamina": __version__, "data_sha256": sha, "model": model_label or stack.name or "",
            "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")}


def _fitted_materials(problem, fitted_stack, fitted_samples) -> dict:
    """Label -> fitted Dispersion for every medium whose optical constants were fitted."""
    out = {}
    by_sample = {s.name: s for s in fitted_samples}
    for block in problem.blocks:
        owners = {full.partition(".")[0] for full in block.drivers if ".material." in full}
        sample = by_sample.get(block.sample)
        stack = fitted_stack.with_params(sample.overrides) if sample and sample.overrides else fitted_stack
        media = dict([("ambient", stack.ambient), ("substrate", stack.substrate)]
                     + [(layer.name, layer.material) for layer in stack.layers])
        for owner in owners:
            own = sample is not None and any(k.startswith(owner + ".material.") for k in sample.overrides)
            label = f"{block.sample}.{owner}" if own else owner
            seen = out.get(label, (None, np.empty(0)))[1]
            out[label] = (media.get(owner), np.concatenate([seen, block.wavelength_nm]))
    return out


__all__ = ["fit", "local_fit", "summarize", "DEFAULT_MAX_REDUCED_CHI2"]
