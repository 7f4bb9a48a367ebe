"""How strongly each layer's thickness moves each band: batched finite differences.

For every layer j the recipe is evaluated at t_j +- h (h = 0.5 nm by default,
all other layers nominal): 2 L perturbed stacks in ONE batched solver call.
The central difference (Q(t + h) - Q(t - h)) / 2h gives dQ/dt_j at every
wavelength of every band (quantity units per nm; for the colour, Delta E 2000
per nm).  |d margin / dt| equals |dQ/dt| wherever one limit is active.

Ranking: a layer's *criticality* in a band is the largest |dQ/dt| over the
band times the layer's thickness tolerance (nm; 1 nm when no tolerances are
given), divided by the width of the band's allowed region (max - min; to the
physical bound of the quantity for one-sided limits; max_delta_e for colour):
the fraction of the allowed region one tolerance of error can sweep.  Layers
are ranked by their largest criticality over all bands.
"""
from __future__ import annotations

import numpy as np

from .recipes import RecipeEvaluator, Target, Tolerances, judge

DEFAULT_STEP_NM = 0.5


def thickness_sensitivity(evaluator: RecipeEvaluator, target: Target, tolerances: Tolerances | None = None,
                          step_nm: float = DEFAULT_STEP_NM) -> dict:
    """Per layer and band: max |dQ/dt| (per nm) and where, shift at tolerance, criticality; and a ranking."""
    names = evaluator.layer_names
    n_layers = len(names)
    nominal = evaluator.nominal_nm
    # rows 0..L-1: +h on layer j; rows L..2L-1: -h (clipped at 0, the step is then one-sided)
    plus = np.tile(nominal, (n_layers, 1)) + step_nm * np.eye(n_layers)
    minus = np.clip(np.tile(nominal, (n_layers, 1)) - step_nm * np.eye(n_layers), 0.0, None)
    spectra = evaluator.spectra(np.vstack([plus, minus]))
    span = (plus - minus)[np.arange(n_layers), np.arange(n_layers)]  # (L,)

    tolerance_nm = np.ones(n_layers)
    if tolerances is not None:
        tolerance_nm = np.array([tolerances.for_layer(n).thickness_scale_nm(t) for n, t in zip(names, nominal)])

    per_layer = {name: {"tolerance_nm": float(tol), "bands": {}} for name, tol in zip(names, tolerance_nm)}
    items = [(f"band:{b.name}", b.name, b.allowed_width(), "per nm") for b in target.bands]
    if target.color is not None:
        items.append(("color", "color", target.color.max_delta_e, "Delta E per nm"))
    for key, label, width, unit in items:
        if key == "color":
            values = judge(target, spectra)["color"][:, None]  # Delta E to the target (2L, 1)
            grid = np.array([np.nan])
        else:
            values = spectra[key]
            grid = _request_grid(evaluator, key)
        derivative = (values[:n_layers] - values[n_layers:]) / span[:, None]  # (L, W)
        for j, name in enumerate(names):
            at = int(np.argmax(np.abs(derivative[j])))
            slope = float(abs(derivative[j, at]))
            shift = slope * tolerance_nm[j]
            per_layer[name]["bands"][label] = {
                "max_abs_derivative": slope, "unit": unit,
                "at_nm": None if np.isnan(grid[at]) else float(grid[at]),
                "shift_at_tolerance": shift, "criticality": shift / width,
            }
    for name in names:
        bands = per_layer[name]["bands"]
        per_layer[name]["criticality"] = max((b["criticality"] for b in bands.values()), default=0.0)
    ranking = sorted(names, key=lambda n: per_layer[n]["criticality"], reverse=True)
    return {"method": f"central differences, step {step_nm:g} nm, one batched solver call",
            "tolerance_basis": "thickness tolerance" if tolerances is not None else "1 nm (no tolerances given)",
            "layers": per_layer, "ranking": ranking}


def _request_grid(evaluator: RecipeEvaluator, key: str) -> np.ndarray:
    for request in evaluator.requests:
        if request.key == key:
            return request.wavelength_nm
    raise KeyError(key)
