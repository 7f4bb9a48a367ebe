"""FitResult: what a fit found, in the shape of result.json.

``to_dict()`` is the public JSON contract (see docs/fitting.md)::

    {"converged", "message", "statistics": {chi2, reduced_chi2, n_points, n_free, rms},
     "parameters": {name: {value, stderr, ci90, min, max, vary, at_bound, unit}},
     "correlations": {name: {other: r}}, "warnings": [...],
     "provenance": {lamina, data_sha256, model, created}}

No NaN or infinity ever reaches JSON: they become null.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import numpy as np

from .parameters import finite_or_none


@dataclass
class FitResult:
    success: bool
    message: str
    stack: object
    parameters: dict
    correlations: dict
    statistics: dict
    warnings: list
    provenance: dict
    #: weighted residuals (model - data) / sigma of every point, in the order of `points`
    residuals: np.ndarray
    #: builds (model datasets, points table) on first use: fits run in bulk (wafer maps) skip it
    outputs_factory: object = None
    #: free parameter names (order of `covariance`) and their covariance matrix
    free_names: list = field(default_factory=list)
    covariance: np.ndarray | None = None
    #: samples with their fitted overrides (multi-sample fits), else []
    samples: list = field(default_factory=list)
    #: number of single-parameter-set model evaluations the fit used
    n_evaluations: int = 0
    #: fitted materials: label -> Dispersion (for n, k plots)
    materials: dict = field(default_factory=dict)

    @property
    def converged(self) -> bool:
        return self.success

    def _outputs(self):
        if getattr(self, "_cached_outputs", None) is None:
            self._cached_outputs = self.outputs_factory()
        return self._cached_outputs

    @property
    def model_dataset(self):
        """Model on the grid of each dataset: one xarray Dataset, or a list (one per dataset, fit order)."""
        sets = self._outputs()[0]
        return sets[0] if len(sets) == 1 else sets

    @property
    def points(self):
        """Per-point pandas DataFrame: sample, angle_deg, wavelength_nm, quantity, data, model, residual, sigma."""
        return self._outputs()[1]

    def sample_stack(self, name: str):
        """The fitted stack of one sample of a multi-sample fit (shared values plus its own)."""
        for sample in self.samples:
            if sample.name == name:
                return self.stack.with_params(sample.overrides) if sample.overrides else self.stack
        raise KeyError(f"no sample '{name}' in this fit")

    def value(self, name: str) -> float:
        return self.parameters[name]["value"]

    def stderr(self, name: str) -> float | None:
        return self.parameters[name]["stderr"]

    def to_dict(self) -> dict:
        return _json_safe({
            "converged": bool(self.success),
            "message": self.message,
            "statistics": self.statistics,
            "parameters": self.parameters,
            "correlations": self.correlations,
            "warnings": list(self.warnings),
            "provenance": self.provenance,
        })

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=2, allow_nan=False) + "\n"

    def summary_table(self) -> str:
        """Console table: parameter, value, +-1 sigma, unit (ties marked)."""
        rows = [("parameter", "value", "+-1 sigma", "unit")]
        for name, p in self.parameters.items():
            err = p["stderr"]
            err_text = "n/a" if err is None or not math.isfinite(err) else f"{err:.4g}"
            flag = "" if p["vary"] else " (tied)"
            flag += " (at bound)" if p.get("at_bound") else ""
            rows.append((name + flag, f"{p['value']:.6g}", err_text, p.get("unit", "")))
        widths = [max(len(r[i]) for r in rows) for i in range(4)]
        lines = ["  ".join(cell.ljust(w) for cell, w in zip(row, widths)).rstrip() for row in rows]
        lines.insert(1, "  ".join("-" * w for w in widths))
        stats = self.statistics
        head = (f"{'converged' if self.success else 'NOT converged'}: reduced chi2 = "
                f"{_fmt(stats.get('reduced_chi2'))}, {stats.get('n_points')} points, {stats.get('n_free')} free")
        units = {"psi": " deg", "delta": " deg"}
        rms = ", ".join(f"{q} {v:.3g}{units.get(q, '')}" for q, v in stats.get("rms", {}).items() if v is not None)
        tail = ([f"rms misfit: {rms}"] if rms else []) + [f"warning: {w}" for w in self.warnings]
        return "\n".join([head] + lines + tail)


def _fmt(value) -> str:
    return "n/a" if value is None else f"{value:.4g}"


def _json_safe(obj):
    """Recursively replace NaN/inf by None and numpy scalars by Python numbers."""
    if isinstance(obj, dict):
        return {str(k): _json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_safe(v) for v in obj]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return finite_or_none(obj)
    return obj
