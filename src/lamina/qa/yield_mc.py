"""Monte Carlo yield of a coating recipe under production tolerances.

Each trial perturbs every layer of the recipe independently (thickness error
in nm or percent of the nominal; optional relative index error applied as a
scale on the layer's complex index N), plus one run-to-run relative thickness
scale shared by all layers of the trial:

    t_j = t_j,nominal * (1 + e_run) + e_j          N_j -> N_j * (1 + f_j)

Gaussian errors use the tolerance as the standard deviation; uniform errors
use it as the half-width.  All errors of a run come from ONE set of standard
normal draws (uniform ones through u = 2 Phi(z) - 1), drawn in a fixed order
from `numpy.random.default_rng(seed)`: the same seed gives the same trials
whatever the tolerances, so yields for growing tolerances are comparable.
Thicknesses that would go negative are clipped at 0 nm.

A trial passes when every band and the colour pass.  The yield is the
fraction of passing trials with a 95 % Wilson score interval (Wilson 1927).

The layer that causes most failures is found by attribution: every failing
trial is run again once per error source (each layer, thickness and index
together; and the run-to-run scale) with that one source's error set to zero
and all others kept; the source whose removal rescues the most failing trials
is named `worst_layer` (None when no single removal rescues any).  At most
`attribution_trials` failing trials (1000 by default, the first ones) are
re-run, so the cost is bounded.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
from scipy.special import ndtr

from .recipes import RecipeEvaluator, Target, Tolerances, judge, wilson_interval

DEFAULT_TRIALS = 10_000
#: spectral points (trials x wavelengths) per chunk by default: the solver's
#: arrays for one chunk (~320 kB each) then stay in a core's own cache, which
#: measured about 1.5x faster than chunks of 400 000 points (benchmarks/yield.py
#: --chunk, on a 2-core machine with 2 MB of L2 per core)
CHUNK_POINTS = 40_000
#: threads evaluating chunks side by side (2 cores is the common case)
DEFAULT_WORKERS = max(1, min(2, os.cpu_count() or 1))
DEFAULT_ATTRIBUTION_TRIALS = 1000  # failing trials re-run per error source


@dataclass
class Draws:
    """Errors of N trials: thickness errors (N, L) nm, run scale (N,), index scales (N, L)."""

    layer_error_nm: np.ndarray
    run_scale: np.ndarray
    index_scale: np.ndarray

    def thicknesses(self, nominal_nm: np.ndarray, layers: np.ndarray | None = None, run: bool = True) -> np.ndarray:
        """Perturbed thicknesses (N, L); `layers` is a mask of layers whose own error is on."""
        errors = self.layer_error_nm if layers is None else self.layer_error_nm * layers[None, :]
        scale = (1.0 + self.run_scale[:, None]) if run else 1.0
        return np.clip(nominal_nm[None, :] * scale + errors, 0.0, None)

    def subset(self, stop: int) -> "Draws":
        return Draws(self.layer_error_nm[:stop], self.run_scale[:stop], self.index_scale[:stop])


def _shaped(z: np.ndarray, distribution) -> np.ndarray:
    """Standard normal draws -> unit-scale errors of the named distribution (per column)."""
    uniform = 2.0 * ndtr(z) - 1.0  # uniform on (-1, 1), same rank as z
    return np.where(np.asarray(distribution) == "uniform", uniform, z)


def draw_errors(tolerances: Tolerances, layer_names: list[str], nominal_nm: np.ndarray, trials: int,
                seed: int | None) -> Draws:
    """All errors of `trials` trials, from one fixed-order block of standard normal draws."""
    rng = np.random.default_rng(seed)
    n_layers = len(layer_names)
    z_thickness = rng.standard_normal((trials, n_layers))
    z_index = rng.standard_normal((trials, n_layers))
    z_run = rng.standard_normal(trials)
    specs = [tolerances.for_layer(name) for name in layer_names]
    distributions = np.array([s.distribution for s in specs])
    thickness_scale = np.array([s.thickness_scale_nm(t) for s, t in zip(specs, nominal_nm)])
    index_scale = np.array([s.index_pct / 100.0 for s in specs])
    layer_error = _shaped(z_thickness, distributions) * thickness_scale[None, :]
    index = 1.0 + _shaped(z_index, distributions) * index_scale[None, :]
    run = _shaped(z_run, tolerances.run_distribution) * tolerances.run_thickness_pct / 100.0
    return Draws(layer_error, run, index)


def default_chunk(evaluator: RecipeEvaluator) -> int:
    """Trials per chunk: about CHUNK_POINTS spectral points over all requested spectra."""
    width = sum(request.wavelength_nm.size for request in evaluator.requests)
    return max(1, CHUNK_POINTS // max(width, 1))


def _pass_mask(evaluator: RecipeEvaluator, target: Target, thickness: np.ndarray, index_scale: np.ndarray,
               chunk: int | None = None, keep: dict | None = None, workers: int | None = None) -> np.ndarray:
    """Pass (N,) of the given trials, evaluated in chunks of `chunk` trials (default: `default_chunk`).

    Chunks run on `workers` threads (default: up to 2, one per core): numpy
    releases the GIL inside its array operations, so two chunks in flight
    use two cores.  Results do not depend on the number of workers or the chunk size.
    """
    chunk = chunk or default_chunk(evaluator)
    starts = list(range(0, thickness.shape[0], chunk))

    def one(start):
        stop = min(start + chunk, thickness.shape[0])
        return judge(target, evaluator.spectra(thickness[start:stop], index_scale[start:stop]))

    workers = min(DEFAULT_WORKERS if workers is None else workers, len(starts))
    if workers > 1:
        with ThreadPoolExecutor(max_workers=workers) as pool:
            results = list(pool.map(one, starts))
    else:
        results = [one(start) for start in starts]
    passes = np.concatenate([r["pass"] for r in results]) if results else np.zeros(0, dtype=bool)
    if keep is not None:
        for judged in results:
            for key, value in judged.items():
                if key != "pass":
                    keep.setdefault(key, []).append(value)
    return passes


def run_yield(evaluator: RecipeEvaluator, target: Target, tolerances: Tolerances, trials: int = DEFAULT_TRIALS,
              seed: int | None = 0, chunk: int | None = None,
              attribution_trials: int = DEFAULT_ATTRIBUTION_TRIALS) -> dict:
    """Monte Carlo yield: fraction passing, 95 % Wilson interval, per-band failures, worst error source."""
    if trials < 1:
        raise ValueError("trials must be >= 1")
    names = evaluator.layer_names
    draws = draw_errors(tolerances, names, evaluator.nominal_nm, trials, seed)
    kept: dict = {}
    passes = _pass_mask(evaluator, target, draws.thicknesses(evaluator.nominal_nm), draws.index_scale, chunk, kept)
    n_pass = int(passes.sum())
    band_failures = {}
    for band in target.bands:
        worst = np.concatenate(kept[f"band:{band.name}"])
        band_failures[band.name] = int((worst < 0).sum())
    if target.color is not None:
        delta_e = np.concatenate(kept["color"])
        band_failures["color"] = int((delta_e > target.color.max_delta_e).sum())
    failing = np.flatnonzero(~passes)[:attribution_trials]
    attribution = attribute_failures(evaluator, target, draws, failing, chunk)
    worst = max(attribution, key=attribution.get) if attribution else None
    if worst is not None and attribution[worst] == 0:
        worst = None
    low, high = wilson_interval(n_pass, trials)
    result = {
        "trials": int(trials),
        "passed": n_pass,
        "pass_fraction": n_pass / trials,
        "ci95": [low, high],
        "ci_method": "Wilson score interval",
        "seed": seed,
        "worst_layer": worst,
        "failures_by_band": band_failures,
        "attribution": {
            "method": "failing trials that pass when only that error source is set to zero",
            "failing_trials_examined": int(failing.size),
            "rescued": attribution,
        },
    }
    if target.min_yield is not None:
        result["min_yield"] = target.min_yield
        result["pass"] = bool(result["pass_fraction"] >= target.min_yield)
    return result


def attribute_failures(evaluator: RecipeEvaluator, target: Target, draws: Draws, failing: np.ndarray,
                       chunk: int | None = None) -> dict[str, int]:
    """Failing trials rescued by removing one error source: each layer (thickness and index) and 'run'.

    Only the failing trials (`failing`, indices into `draws`) are evaluated
    again, once per error source with that source's error set to zero and
    every other error kept: the cost grows with the number of failures, not
    with the number of trials.
    """
    names = evaluator.layer_names
    nominal = evaluator.nominal_nm
    if failing.size == 0:
        return {name: 0 for name in names}
    subset = Draws(draws.layer_error_nm[failing], draws.run_scale[failing], draws.index_scale[failing])
    counts: dict[str, int] = {}
    for j, name in enumerate(names):
        if not np.any(subset.layer_error_nm[:, j]) and not np.any(subset.index_scale[:, j] != 1.0):
            counts[name] = 0
            continue
        mask = np.ones(len(names))
        mask[j] = 0.0
        index = subset.index_scale.copy()
        index[:, j] = 1.0
        thickness = subset.thicknesses(nominal, layers=mask, run=True)
        counts[name] = int(_pass_mask(evaluator, target, thickness, index, chunk).sum())
    if np.any(subset.run_scale):
        thickness = subset.thicknesses(nominal, run=False)
        counts["run"] = int(_pass_mask(evaluator, target, thickness, subset.index_scale, chunk).sum())
    return counts


def envelope(evaluator: RecipeEvaluator, draws: Draws, percentiles=(5.0, 95.0)) -> dict[str, np.ndarray]:
    """Per request key, the percentiles (P, W) of the spectra over the given draws (for plots)."""
    spectra = evaluator.spectra(draws.thicknesses(evaluator.nominal_nm), draws.index_scale)
    return {key: np.percentile(values, percentiles, axis=0) for key, values in spectra.items()}
