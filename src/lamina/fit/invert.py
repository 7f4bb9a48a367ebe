"""Point-by-point inversion: n and k of one layer, wavelength by wavelength.

Every other quantity of the model (thicknesses included) stays fixed, usually
at the values of a previous fit.  At each wavelength the two unknowns n, k are
found from everything measured at that wavelength (Psi and Delta at one or
more angles, R, T), by a damped Gauss-Newton (Levenberg-Marquardt) iteration
run for all wavelengths at once: one solver call evaluates the base point and
the two finite-difference perturbations of every wavelength (a batch of 3),
and the 2x2 normal equations are solved in closed form, vectorized.

Starts: the model's own n, k; then "continuation" passes restart every
wavelength from its left and from its right neighbour's solution (again all
at once) and keep whichever is better, so a solution found at one wavelength
propagates into regions where the model's start was poor.

Uncertainty of each (n, k): the 2x2 covariance (J^T J)^-1 of that wavelength's
weighted residuals, scaled by chi2 / dof when the data carry no ``_err``
columns and dof > 0 (same rule as the main fit, docs/fitting.md).

Kramers-Kronig check: a causal oscillator sum (eps_inf + Lorentz oscillators,
one of them above the measured range) is fitted to the n, k table; a table
that such a model cannot follow (rms misfit well above the point
uncertainties) is not Kramers-Kronig consistent, which usually means the
fixed parts of the model (thicknesses, other layers) are wrong.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import LaminaInputError
from ..units import HC_EV_NM
from .objective import DEFAULT_SIGMA, QUANTITIES, make_block, wrap_degrees

MAX_ITERATIONS = 60
#: iterations of a restart from a neighbour's solution (close to a solution already)
CONTINUATION_ITERATIONS = 25
STEP = 1e-6
#: k never goes below this (absorption is non-negative; exactly 0 keeps the derivative one-sided)
K_FLOOR = 0.0


@dataclass
class Inversion:
    wavelength_nm: np.ndarray
    n: np.ndarray
    k: np.ndarray
    n_err: np.ndarray
    k_err: np.ndarray
    chi2: np.ndarray
    dof: np.ndarray
    converged: np.ndarray
    layer: str
    kk: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)

    @property
    def success(self) -> bool:
        return bool(np.all(self.converged))

    def table(self):
        import pandas as pd
        return pd.DataFrame({"wavelength_nm": self.wavelength_nm, "n": self.n, "k": self.k,
                             "n_err": self.n_err, "k_err": self.k_err})

    def to_dict(self) -> dict:
        from .result import _json_safe
        bad = self.wavelength_nm[~self.converged]
        return _json_safe({
            "converged": self.success,
            "layer": self.layer,
            "n_wavelengths": int(self.wavelength_nm.size),
            "not_converged_nm": bad.tolist(),
            "chi2_per_wavelength": {"median": float(np.median(self.chi2)), "max": float(np.max(self.chi2))},
            "kramers_kronig": self.kk,
            "warnings": list(self.warnings),
        })


class _PointProblem:
    """Residuals at every wavelength for (n, k) arrays of shape (B, W)."""

    def __init__(self, stack, dataset, layer: str):
        index = [i for i, lay in enumerate(stack.layers) if lay.name == layer]
        if not index:
            raise LaminaInputError(f"no layer '{layer}' in the model", "--layer",
                                   "one of " + ", ".join(lay.name for lay in stack.layers))
        self.block = make_block("", dataset, stack)
        self.block.prepare()
        self.layer_position = index[0] + 1          # ambient is medium 0
        self.stack = stack
        block = self.block
        self.W = block.wavelength_nm.size
        # (W, M) layout: every measured point goes to its wavelength's row
        counts = np.bincount(np.concatenate([wi for _, wi in block.index.values()]), minlength=self.W)
        self.M = int(counts.max())
        self.dof = counts - 2
        self.slot = np.zeros(block.n_points, dtype=int)
        self.wl_of_point = np.concatenate([wi for _, wi in block.index.values()])
        fill = np.zeros(self.W, dtype=int)
        for p, w in enumerate(self.wl_of_point):
            self.slot[p] = fill[w]
            fill[w] += 1
        self.used = np.zeros((self.W, self.M), dtype=bool)
        self.used[self.wl_of_point, self.slot] = True
        self.trusted = block.trusted_errors
        inputs = stack.optical_inputs(block.wavelength_nm)
        self.n_media = list(inputs.n_media)
        self.thickness, self.coherent = inputs.thickness_nm, inputs.coherent

    def start(self) -> tuple[np.ndarray, np.ndarray]:
        nk = self.n_media[self.layer_position]
        return np.real(nk).astype(float).copy(), np.maximum(np.imag(nk), K_FLOOR).astype(float).copy()

    def residuals(self, n: np.ndarray, k: np.ndarray) -> np.ndarray:
        """(B, W, M) weighted residuals (0 in unused slots) for (B, W) n and k."""
        from ..optics import solve
        batch = n.shape[0]
        media = list(self.n_media)
        media[self.layer_position] = n + 1j * k
        result = solve(media, self.thickness, self.coherent, self.block.wavelength_nm, self.block.angle_deg)
        block = self.block
        shape = (batch, block.angle_deg.size, self.W)
        model = np.concatenate([np.broadcast_to(result[q], shape)[:, ai, wi] for q, (ai, wi) in block.index.items()],
                               axis=1)
        weighted = block.weighted_residuals(model)
        out = np.zeros((batch, self.W, self.M))
        out[:, self.wl_of_point, self.slot] = np.where(np.isfinite(weighted), weighted, 1e6)
        return out


def _lm(problem: _PointProblem, n: np.ndarray, k: np.ndarray, iterations: int = MAX_ITERATIONS):
    """Vectorized Levenberg-Marquardt over all wavelengths; returns n, k, chi2, J, converged.

    Every trial point is evaluated together with its two finite-difference
    neighbours (one solver call, batch of 3), so an accepted step already has
    its Jacobian.
    """
    damping = np.full(n.shape, 1e-3)
    converged = np.zeros(n.shape, dtype=bool)
    r, J = _residual_and_jacobian(problem, n, k)
    chi2 = np.einsum("wm,wm->w", r, r)
    eye = np.eye(2)
    for _ in range(iterations):
        JTJ = np.einsum("wmi,wmj->wij", J, J)
        g = np.einsum("wmi,wm->wi", J, r)
        diag = np.diagonal(JTJ, axis1=1, axis2=2)[:, :, None] * eye
        step = -_solve2(JTJ + damping[:, None, None] * (diag + 1e-12 * eye), g)
        # k pinned at its floor and pushed below it: the bound is active, step in n alone
        active = (k <= K_FLOOR) & (step[:, 1] < 0)
        if active.any():
            jnn = JTJ[:, 0, 0] * (1 + damping) + 1e-300
            step[:, 0] = np.where(active, -g[:, 0] / jnn, step[:, 0])
            step[:, 1] = np.where(active, 0.0, step[:, 1])
        step[converged] = 0.0
        n_new = n + step[:, 0]
        k_new = np.maximum(k + step[:, 1], K_FLOOR)
        r_new, J_new = _residual_and_jacobian(problem, n_new, k_new)
        chi2_new = np.einsum("wm,wm->w", r_new, r_new)
        better = (chi2_new < chi2) & ~converged
        tiny_step = np.abs(step).max(axis=1) < 1e-10 * np.maximum(1.0, np.abs(n))
        tiny_gain = better & (chi2 - chi2_new <= 1e-10 * np.maximum(chi2, 1e-30))
        converged |= tiny_step | tiny_gain | (damping > 1e8)
        n, k = np.where(better, n_new, n), np.where(better, k_new, k)
        r = np.where(better[:, None], r_new, r)
        J = np.where(better[:, None, None], J_new, J)
        chi2 = np.where(better, chi2_new, chi2)
        damping = np.where(better, damping * 0.3, damping * 10.0)
        if converged.all():
            break
    return n, k, chi2, J, converged


#: chi-square difference below which two solutions at one wavelength count as equally good
EQUAL_CHI2 = 1.0


def _roughness(n_j, k_j, n, k) -> np.ndarray:
    """Distance in (n, k) from each wavelength's value to its two neighbours' current values."""
    left_n, left_k = np.r_[n[:1], n[:-1]], np.r_[k[:1], k[:-1]]
    right_n, right_k = np.r_[n[1:], n[-1:]], np.r_[k[1:], k[-1:]]
    return np.hypot(n_j - left_n, k_j - left_k) + np.hypot(n_j - right_n, k_j - right_k)


def _accept(n, k, chi2, candidate, parity: int) -> np.ndarray:
    """Where a neighbour-started solution replaces the current one.

    Clearly better (chi-square lower by more than EQUAL_CHI2), or as good
    within EQUAL_CHI2 and closer to its neighbours (continuity decides between
    solutions the data cannot tell apart, e.g. R and T alone).  Only every
    other wavelength (`parity`) changes at a time, so each one is judged
    against neighbours that stay put.
    """
    cand_n, cand_k, cand_chi2 = candidate[0], candidate[1], candidate[2]
    own = (np.arange(n.size) % 2) == parity
    better = cand_chi2 < chi2 - EQUAL_CHI2
    smoother = (cand_chi2 <= chi2 + EQUAL_CHI2) & (_roughness(cand_n, cand_k, n, k)
                                                   < _roughness(n, k, n, k) - 1e-9)
    return own & np.isfinite(cand_chi2) & (better | smoother)


def _residual_and_jacobian(problem, n, k):
    hn = STEP * np.maximum(np.abs(n), 1.0)
    hk = STEP * np.maximum(np.abs(k), 1.0)
    stack_n = np.stack([n, n + hn, n])
    stack_k = np.stack([k, k, k + hk])
    r = problem.residuals(stack_n, stack_k)
    J = np.stack([(r[1] - r[0]) / hn[:, None], (r[2] - r[0]) / hk[:, None]], axis=-1)
    return r[0], J


def _solve2(A: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve (W, 2, 2) x = (W, 2) in closed form."""
    a, bb, c, d = A[:, 0, 0], A[:, 0, 1], A[:, 1, 0], A[:, 1, 1]
    det = a * d - bb * c
    det = np.where(np.abs(det) > 0, det, 1e-300)
    return np.stack([(d * b[:, 0] - bb * b[:, 1]) / det, (a * b[:, 1] - c * b[:, 0]) / det], axis=1)


def _covariance(J: np.ndarray) -> np.ndarray:
    JTJ = np.einsum("wmi,wmj->wij", J, J)
    a, b, c, d = JTJ[:, 0, 0], JTJ[:, 0, 1], JTJ[:, 1, 0], JTJ[:, 1, 1]
    det = a * d - b * c
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = np.stack([np.stack([d, -b], -1), np.stack([-c, a], -1)], -2) / det[:, None, None]
    inv[~(det > 0)] = np.inf
    return inv


def invert(stack, data, layer: str, *, passes: int | None = None, kk_oscillators: int = 3) -> Inversion:
    """n, k of `layer` at every measured wavelength (see module docstring)."""
    if isinstance(data, (list, tuple)):
        from ..data.readers import merge_data
        data = merge_data(list(data)) if len(data) > 1 else data[0]
    problem = _PointProblem(stack, data, layer)
    n, k = problem.start()
    n, k, chi2, J, converged = _lm(problem, n, k)
    # each pass carries solutions one wavelength further; stop when nothing changes
    for _ in range(passes if passes is not None else problem.W):
        changed = False
        for shift in (1, -1):
            start_n, start_k = np.roll(n, shift), np.roll(k, shift)
            edge = 0 if shift == 1 else -1
            start_n[edge], start_k[edge] = n[edge], k[edge]
            candidate = _lm(problem, start_n, start_k, CONTINUATION_ITERATIONS)
            for parity in (0, 1):
                accept = _accept(n, k, chi2, candidate, parity)
                if accept.any():
                    changed = True
                    n, k = np.where(accept, candidate[0], n), np.where(accept, candidate[1], k)
                    chi2 = np.where(accept, candidate[2], chi2)
                    J = np.where(accept[:, None, None], candidate[3], J)
                    converged = np.where(accept, candidate[4], converged)
        if not changed:
            break
    cov = _covariance(J)
    scale = np.where((~problem.trusted) & (problem.dof > 0), chi2 / np.maximum(problem.dof, 1), 1.0)
    n_err = np.sqrt(cov[:, 0, 0] * scale)
    k_err = np.sqrt(cov[:, 1, 1] * scale)
    result = Inversion(problem.block.wavelength_nm, n, k, n_err, k_err, chi2, problem.dof,
                       converged & np.isfinite(chi2), layer)
    if np.any(problem.dof < 0):
        result.warnings.append(f"{int(np.sum(problem.dof < 0))} wavelengths have fewer than 2 measured values: "
                               "n and k are not both determined there")
    if not result.success:
        result.warnings.append(f"{int(np.sum(~result.converged))} wavelengths did not converge")
    result.kk = kramers_kronig_check(result.wavelength_nm, n, k, n_err, k_err, kk_oscillators)
    if not result.kk.get("consistent", True):
        result.warnings.append(result.kk["note"])
    return result


# -- Kramers-Kronig consistency ------------------------------------------------------------

def oscillator_sum(energy_ev, eps_inf, amplitudes, centers_ev, widths_ev):
    """eps = eps_inf + sum_j A_j E_j^2 / (E_j^2 - E^2 - i G_j E) (Lorentz oscillators; causal by construction)."""
    E = np.asarray(energy_ev, dtype=float)[:, None]
    terms = amplitudes * centers_ev ** 2 / (centers_ev ** 2 - E ** 2 - 1j * widths_ev * E)
    return eps_inf + terms.sum(axis=1)


def kramers_kronig_check(wavelength_nm, n, k, n_err, k_err, oscillators: int = 3) -> dict:
    """Fit a Lorentz-oscillator sum to the n, k table; report the misfit in n and k."""
    from scipy.optimize import least_squares
    energy = HC_EV_NM / np.asarray(wavelength_nm, dtype=float)
    e_lo, e_hi = float(energy.min()), float(energy.max())
    ok = np.isfinite(n) & np.isfinite(k)
    if ok.sum() < 3 * oscillators + 2:
        return {"consistent": None, "note": "too few wavelengths for the oscillator check"}
    sn = np.where(np.isfinite(n_err) & (n_err > 0), n_err, np.nan)
    sk = np.where(np.isfinite(k_err) & (k_err > 0), k_err, np.nan)
    floor = 1e-3
    sn = np.where(np.isfinite(sn), np.maximum(sn, floor), 10 * floor)
    sk = np.where(np.isfinite(sk), np.maximum(sk, floor), 10 * floor)
    m = oscillators
    centers = np.concatenate([np.linspace(e_lo, e_hi, m - 1 + 2)[1:-1] if m > 1 else [], [2.0 * e_hi]])
    x0 = np.concatenate([[1.0], np.full(m, 0.3), centers, np.full(m, 0.3 * (e_hi - e_lo) + 0.1)])
    lower = np.concatenate([[0.5], np.zeros(m), np.full(m, 0.3 * e_lo), np.full(m, 1e-3)])
    upper = np.concatenate([[20.0], np.full(m, 100.0), np.full(m, 10 * e_hi), np.full(m, 10 * (e_hi + 1))])

    def model_nk(x):
        eps = oscillator_sum(energy[ok], x[0], x[1:1 + m], x[1 + m:1 + 2 * m], x[1 + 2 * m:])
        return np.sqrt(eps)

    def residual(x):
        N = model_nk(x)
        return np.concatenate([(N.real - n[ok]) / sn[ok], (N.imag - k[ok]) / sk[ok]])

    best = None
    for shift in (1.0, 0.6, 1.6):
        start = x0.copy()
        start[1 + m:1 + 2 * m] = np.clip(centers * shift, lower[1 + m:1 + 2 * m] * 1.01, upper[1 + m:1 + 2 * m] * 0.99)
        fit = least_squares(residual, np.clip(start, lower * 1.0001 + 1e-9, upper * 0.9999), bounds=(lower, upper),
                            max_nfev=2000)
        if best is None or fit.cost < best.cost:
            best = fit
    N = model_nk(best.x)
    rms_n = float(np.sqrt(np.mean((N.real - n[ok]) ** 2)))
    rms_k = float(np.sqrt(np.mean((N.imag - k[ok]) ** 2)))
    typical_n = float(np.median(np.where(np.isfinite(n_err[ok]), n_err[ok], 0.0)))
    typical_k = float(np.median(np.where(np.isfinite(k_err[ok]), k_err[ok], 0.0)))
    limit_n, limit_k = 3 * typical_n + 0.005, 3 * typical_k + 0.005
    consistent = rms_n <= limit_n and rms_k <= limit_k
    note = (f"n, k table follows a causal oscillator sum (rms {rms_n:.2g} in n, {rms_k:.2g} in k)" if consistent
            else f"n, k table is not Kramers-Kronig consistent: an oscillator sum misses it by rms {rms_n:.2g} in n "
                 f"and {rms_k:.2g} in k (limits {limit_n:.2g}, {limit_k:.2g}); check the fixed thicknesses and layers")
    return {"model": f"eps_inf + {m} Lorentz oscillators (one above the measured range)", "rms_n": rms_n,
            "rms_k": rms_k, "limit_n": limit_n, "limit_k": limit_k, "consistent": bool(consistent), "note": note,
            "eps_inf": float(best.x[0]),
            "oscillators": [{"amplitude": float(a), "center_ev": float(c), "broadening_ev": float(g)}
                            for a, c, g in zip(best.x[1:1 + m], best.x[1 + m:1 + 2 * m], best.x[1 + 2 * m:])]}


__all__ = ["invert", "Inversion", "kramers_kronig_check", "oscillator_sum", "DEFAULT_SIGMA", "QUANTITIES",
           "wrap_degrees"]
