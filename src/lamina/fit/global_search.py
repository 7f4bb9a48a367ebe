"""Global search: good starting points for the local fit of a multi-modal problem.

Psi, Delta, R and T of a transparent film repeat when its thickness grows by
one period  P = lambda / (2 sqrt(n^2 - sin^2 theta))  (e.g. Azzam and Bashara,
Ellipsometry and Polarized Light, 1977, sec. 4.3; Fujiwara, Spectroscopic
Ellipsometry, 2007, sec. 5.3), so a least-squares fit started in the wrong
period ends in the wrong minimum.  The search therefore

1. scans every free thickness-like parameter (`ParamSpec.thickness_like`) on
   a grid whose step is a fraction (`STEPS_PER_PERIOD`) of the shortest period
   of that layer over the data (shortest wavelength, smallest angle), all grid
   points evaluated in batches through the solver's batch axis; a full grid
   when the product of the axes is small, otherwise coordinate-wise sweeps;
2. when other free parameters with finite bounds exist, runs scipy's
   differential evolution (vectorized, population evaluated as one batch) over
   them together with the thicknesses (restricted to +-1 period around the best
   scanned point);
3. returns the start, the few best distinct scan points and the evolution's
   result; the engine refines each locally and keeps the lowest chi-square.
"""
from __future__ import annotations

import itertools

import numpy as np

STEPS_PER_PERIOD = 8
MAX_AXIS_POINTS = 3000
MAX_GRID_POINTS = 20000
N_CANDIDATES = 4
#: scan range above the start when a thickness has no upper bound, in periods
UNBOUNDED_SPAN_PERIODS = 20


def shortest_period_nm(problem, name: str, x0: np.ndarray) -> float:
    """Shortest thickness period of the layer behind free parameter `name` over all blocks."""
    periods = []
    for block in problem.blocks:
        for full, public in block.drivers.items():
            if public != name or not full.endswith(".thickness_nm"):
                continue
            layer = block.stack.layer(full.partition(".")[0])
            n = np.real(layer.material.nk(block.wavelength_nm))
            sin2 = np.sin(np.radians(block.angle_deg.min())) ** 2
            root = np.sqrt(np.maximum(n ** 2 - sin2, 1e-4))
            periods.append(np.min(block.wavelength_nm / (2.0 * root)))
    return float(min(periods)) if periods else float("nan")


def _axis(problem, j: int, name: str, x0, lo, hi) -> np.ndarray:
    period = shortest_period_nm(problem, name, x0)
    if not np.isfinite(period) or period <= 0:
        period = 50.0
    start = lo[j] if np.isfinite(lo[j]) else 0.0
    stop = hi[j] if np.isfinite(hi[j]) else x0[j] + UNBOUNDED_SPAN_PERIODS * period
    step = max(period / STEPS_PER_PERIOD, (stop - start) / MAX_AXIS_POINTS)
    count = int(np.ceil((stop - start) / step)) + 1
    return np.linspace(start, stop, max(count, 2))


def _chi2_batched(problem, X: np.ndarray, chunk: int = 2000) -> np.ndarray:
    return np.concatenate([problem.chi2(X[i:i + chunk]) for i in range(0, len(X), chunk)])


def _distinct_best(points: np.ndarray, chi2: np.ndarray, spacing: np.ndarray, count: int) -> list[np.ndarray]:
    order = np.argsort(chi2)
    picked: list[np.ndarray] = []
    for i in order:
        if all(np.any(np.abs(points[i] - p) > 2 * spacing) for p in picked):
            picked.append(points[i])
        if len(picked) == count:
            break
    return picked


def scan_thicknesses(problem, x0: np.ndarray) -> tuple[list[np.ndarray], dict]:
    """Best distinct points of a period-aware thickness scan (other parameters at x0)."""
    table = problem.table
    lo, hi = table.bounds()
    thick = [j for j, n in enumerate(table.free) if table.items[n].thickness_like]
    if not thick:
        return [], {}
    axes = [_axis(problem, j, table.free[j], x0, lo, hi) for j in thick]
    spacing = np.array([a[1] - a[0] for a in axes])
    info = {"scanned": [table.free[j] for j in thick], "steps_nm": spacing.tolist()}
    if np.prod([len(a) for a in axes], dtype=float) <= MAX_GRID_POINTS:
        grid = np.array(list(itertools.product(*axes)))
        X = np.repeat(x0[None, :], len(grid), axis=0)
        X[:, thick] = grid
        chi2 = _chi2_batched(problem, X)
        info["mode"] = "grid"
        info["points"] = int(len(grid))
        return [X[k] for k in _index_of(X, _distinct_best(grid, chi2, spacing, N_CANDIDATES), thick)], info
    # coordinate-wise sweeps (separable problems, e.g. one thickness per sample)
    best = x0.copy()
    evaluated = 0
    for _ in range(2):
        for axis_index, j in enumerate(thick):
            X = np.repeat(best[None, :], len(axes[axis_index]), axis=0)
            X[:, j] = axes[axis_index]
            chi2 = _chi2_batched(problem, X)
            evaluated += len(X)
            best = X[int(np.argmin(chi2))].copy()
    info["mode"] = "sweeps"
    info["points"] = evaluated
    return [best], info


def _index_of(X, picked, thick):
    out = []
    for p in picked:
        out.append(int(np.argmin(np.abs(X[:, thick] - p).sum(axis=1))))
    return out


def evolve(problem, centre: np.ndarray, seed: int = 0, maxiter: int = 40) -> np.ndarray | None:
    """Differential evolution over free parameters with finite bounds (thicknesses near `centre`)."""
    from scipy.optimize import differential_evolution
    table = problem.table
    lo, hi = table.bounds()
    others = [j for j, n in enumerate(table.free)
              if not table.items[n].thickness_like and np.isfinite(lo[j]) and np.isfinite(hi[j])]
    if not others:
        return None
    thick = [j for j, n in enumerate(table.free) if table.items[n].thickness_like]
    dims = others + thick
    bounds = [(lo[j], hi[j]) for j in others]
    for j in thick:
        period = shortest_period_nm(problem, table.free[j], centre)
        period = period if np.isfinite(period) else 50.0
        a, b = max(lo[j], centre[j] - period), min(hi[j], centre[j] + period)
        bounds.append((a, b) if b > a else (lo[j], hi[j]))
    bounds = [(a, b) if b > a else (a, a + 1e-12) for a, b in bounds]

    def cost(population):
        population = np.atleast_2d(population.T) if population.ndim == 2 else population[None, :]
        X = np.repeat(centre[None, :], len(population), axis=0)
        X[:, dims] = population
        return _chi2_batched(problem, X)

    result = differential_evolution(cost, bounds, vectorized=True, updating="deferred", maxiter=maxiter,
                                    popsize=10, seed=seed, polish=False, tol=1e-6)
    x = centre.copy()
    x[dims] = result.x
    return x


def candidates(problem, x0: np.ndarray, seed: int = 0) -> tuple[list[np.ndarray], dict]:
    """Starting points for local refinement, best guesses first, plus a description of the search."""
    picked, info = scan_thicknesses(problem, x0)
    starts = list(picked)
    centre = picked[0] if picked else x0
    evolved = evolve(problem, centre, seed=seed)
    if evolved is not None:
        starts.append(evolved)
        info["evolution"] = True
    starts.append(x0)
    return starts, info
