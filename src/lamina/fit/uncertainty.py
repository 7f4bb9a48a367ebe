"""Jacobians by batched finite differences, covariance, standard errors, correlations.

Linearised least squares (e.g. Press et al., Numerical Recipes, 3rd ed. 2007,
sec. 15.4-15.5; Bevington and Robinson 2003, ch. 8): with weighted residuals
r = (model - data) / sigma and their Jacobian J with respect to the free
parameters, the covariance of the estimate is C = (J^T J)^-1.  It is exact
for a linear model with Gaussian errors whose sigmas are right.

Scaling: when every point carries a measured uncertainty (``_err`` columns)
those sigmas are trusted and C is reported as is; reduced chi-square then tests
the model (~1 when model and errors agree).  When default sigmas were assumed
the absolute scale of the errors is unknown, so C is multiplied by reduced
chi-square (the usual estimate of the noise variance from the scatter of the
residuals).
"""
from __future__ import annotations

import numpy as np

#: two-sided 90 % quantile of the standard normal distribution (z_0.95)
Z90 = 1.6448536269514722


def step_sizes(x: np.ndarray, relative: float) -> np.ndarray:
    """Finite-difference steps: relative to |x|, never below `relative` (parameters of order 1)."""
    return relative * np.maximum(np.abs(x), 1.0)


def forward_jacobian(residuals, x: np.ndarray, base: np.ndarray, upper: np.ndarray,
                     relative: float = 1e-7) -> np.ndarray:
    """(P, F) Jacobian of residuals(X (B, F)) -> (B, P) by forward differences, all columns in one batch.

    A step that would cross the upper bound goes backwards instead.
    """
    h = step_sizes(x, relative)
    h = np.where(x + h > upper, -h, h)
    perturbed = x[None, :] + np.diag(h)
    r = residuals(perturbed)
    return ((r - base[None, :]) / h[:, None]).T


def central_jacobian(residuals, x: np.ndarray, lower: np.ndarray, upper: np.ndarray,
                     relative: float = 1e-5) -> np.ndarray:
    """(P, F) Jacobian by central differences (one batch of 2F evaluations), one-sided at bounds."""
    n = x.size
    h = step_sizes(x, relative)
    plus = np.minimum(x + h, upper)
    minus = np.maximum(x - h, lower)
    batch = np.repeat(x[None, :], 2 * n, axis=0)
    batch[np.arange(n), np.arange(n)] = plus
    batch[n + np.arange(n), np.arange(n)] = minus
    r = residuals(batch)
    width = plus - minus
    width = np.where(width > 0, width, 1.0)
    return ((r[:n] - r[n:]) / width[:, None]).T


def covariance(jacobian: np.ndarray) -> tuple[np.ndarray, list[int]]:
    """(J^T J)^-1 with column scaling; returns it and the indices of undetermined parameters.

    Parameters whose column is zero, or that lie in the null space of J,
    get infinite variance (not determined by the data).
    """
    jtj = jacobian.T @ jacobian
    norm = np.sqrt(np.diag(jtj))
    undetermined = [int(i) for i in np.nonzero(~(norm > 0))[0]]
    safe = np.where(norm > 0, norm, 1.0)
    scaled = jtj / np.outer(safe, safe)
    eigval, eigvec = np.linalg.eigh(scaled)
    tiny = eigval.max(initial=0.0) * 1e-12
    weak = eigval <= tiny
    inv = (eigvec[:, ~weak] / eigval[~weak]) @ eigvec[:, ~weak].T
    cov = inv / np.outer(safe, safe)
    if weak.any():
        # a parameter with weight in a null direction is not determined
        loads = np.abs(eigvec[:, weak]).max(axis=1)
        undetermined += [int(i) for i in np.nonzero(loads > 1e-3)[0] if int(i) not in undetermined]
    for i in undetermined:
        cov[i, :] = np.nan
        cov[:, i] = np.nan
        cov[i, i] = np.inf
    return cov, sorted(undetermined)


def correlations(cov: np.ndarray) -> np.ndarray:
    """Correlation matrix from a covariance (NaN where a variance is infinite or zero)."""
    sd = np.sqrt(np.diag(cov))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sd, sd)
    corr[~np.isfinite(corr)] = np.nan
    np.fill_diagonal(corr, 1.0)
    return corr


def tied_stderr(table, x: np.ndarray, cov: np.ndarray, relative: float = 1e-6) -> dict[str, float]:
    """Standard errors of tied parameters by the delta method: var = g^T C g, g by finite differences."""
    if not table.tied:
        return {}
    n = x.size
    h = step_sizes(x, relative)
    batch = np.repeat(x[None, :], n + 1, axis=0)
    batch[1 + np.arange(n), np.arange(n)] += h
    values = table.values(batch)
    out = {}
    for name in table.tied:
        v = np.broadcast_to(np.asarray(values[name], dtype=float), (n + 1,))
        g = (v[1:] - v[0]) / h
        undetermined = ~np.isfinite(np.diag(cov))
        if np.any(g[undetermined] != 0):
            var = np.inf
        else:
            var = float(g @ np.where(np.isfinite(cov), cov, 0.0) @ g)
        out[name] = float(np.sqrt(var)) if var >= 0 else np.nan
    return out


def interval90(value: float, stderr: float, lower: float, upper: float) -> tuple[float, float]:
    """value +- 1.645 sigma, clipped to the fit bounds (normal approximation)."""
    if not np.isfinite(stderr):
        return (lower, upper)
    return (max(lower, value - Z90 * stderr), min(upper, value + Z90 * stderr))
