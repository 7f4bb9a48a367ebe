"""Output folders as lamina fit / map / check write them, for the report tests.

The numbers are invented (a fictitious "Larkspur Optics pilot line" oxide on a
150 mm Si wafer, and a 4-layer anti-reflection coating on glass); only their
shape follows the JSON contracts of result.json, summary.json + sites.csv and
check.json.
"""
from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

HOSTILE = "<script>alert('x')</script>"


def write_plot(path: Path, title: str) -> None:
    """A small coloured PNG like the ones the plot modules write."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np
    wl = np.linspace(300, 1000, 60)
    fig, ax = plt.subplots(figsize=(4, 2.5), dpi=60)
    for i, angle in enumerate((65, 70, 75)):
        ax.plot(wl, 20 + 5 * i + 3 * np.sin(wl / 80 + i), label=f"{angle} deg")
    ax.set_title(title)
    ax.legend()
    fig.savefig(path)
    plt.close(fig)


def fit_result(converged: bool = True, name: str = "w07_center.csv") -> dict:
    return {
        "converged": converged,
        "message": "converged: relative change in chi-square below tolerance" if converged
        else "did not converge: maximum number of function evaluations reached",
        "statistics": {"chi2": 289.41, "reduced_chi2": 1.0337, "n_points": 282, "n_free": 2,
                       "rms": {"psi": 0.0201, "delta": 0.0512}},
        "parameters": {
            "oxide.thickness_nm": {"value": 101.23456, "stderr": 0.01234, "ci90": [101.21426, 101.25486],
                                   "min": 0.0, "max": 500.0, "vary": True, "at_bound": False, "unit": "nm"},
            "oxide.material.A": {"value": 1.45321, "stderr": 0.00052, "ci90": [1.45235, 1.45407],
                                 "min": 1.3, "max": 1.6, "vary": True, "at_bound": False, "unit": ""},
            "native.thickness_nm": {"value": 0.0, "stderr": None, "ci90": None, "min": 0.0, "max": 5.0,
                                    "vary": True, "at_bound": True, "unit": "nm"},
        },
        "correlations": {"oxide.thickness_nm": {"oxide.material.A": -0.962, "native.thickness_nm": 0.31},
                         "oxide.material.A": {"oxide.thickness_nm": -0.962, "native.thickness_nm": -0.12},
                         "native.thickness_nm": {"oxide.thickness_nm": 0.31, "oxide.material.A": -0.12}},
        "warnings": ["native.thickness_nm ended at its bound 0",
                     "oxide.thickness_nm and oxide.material.A are correlated (r = -0.96)"],
        "provenance": {"lamina": "0.1.0", "data_sha256": {name: "3f" * 32},
                       "model": "oxide_on_si.toml", "created": "2026-12-01T22:40:00Z"},
    }


FITTED_TOML = '''name = "oxide on silicon"

[[layers]]
name = "oxide"
thickness_nm = { value = 101.23456, min = 0.0, max = 500.0 }
material = "SiO2"

[substrate]
material = "Si"
'''


@pytest.fixture
def fit_dir(tmp_path) -> Path:
    out = tmp_path / "fit_out"
    out.mkdir()
    (out / "result.json").write_text(json.dumps(fit_result(), indent=2))
    (out / "fitted.toml").write_text(FITTED_TOML)
    write_plot(out / "fit_psi_delta.png", "Psi and Delta")
    return out


def map_summary() -> dict:
    """The shape lamina map writes (qa.maps.summarize plus inputs and exit_code)."""
    stats = {"mean": 149.12, "std": 0.84, "min": 147.6, "max": 151.9, "range": 4.3,
             "nonuniformity_pct": 1.44, "std_over_mean_pct": 0.56, "n_sites": 7, "unit": "nm"}
    return {
        "n_sites": 14, "n_fitted": 13, "n_failed": 1, "n_wafers": 2,
        "geometry": {"diameter_mm": 150.0, "edge_exclusion_mm": 5.0},
        "spec": {"path": "oxide_spec.toml", "limits": {"oxide.thickness_nm": {"lower": 146.0, "upper": 152.0}},
                 "uniformity": {"oxide.thickness_nm": {"max_nonuniformity_pct": 2.0}}},
        "pass": False,
        "wafers": {
            "LK-0412-03": {"n_sites": 7, "n_in_zone": 7, "n_failed": 0, "n_failed_in_zone": 0, "failed_sites": [],
                           "parameters": {"oxide.thickness_nm": stats}, "pass": True, "reasons": []},
            "LK-0412-04": {"n_sites": 7, "n_in_zone": 7, "n_failed": 1, "n_failed_in_zone": 1, "failed_sites": ["7"],
                           "parameters": {"oxide.thickness_nm": dict(stats, mean=147.3, nonuniformity_pct=2.9)},
                           "pass": False,
                           "reasons": ["1 site(s) inside the edge exclusion could not be fitted",
                                       "oxide.thickness_nm: 1 site(s) below lower limit 146.0 nm",
                                       "oxide.thickness_nm: non-uniformity 2.9 % above 2.0 %"]},
        },
        "inputs": {"map": "lot0412_map.csv", "model": "oxide_on_si.toml", "spec": "oxide_spec.toml"},
        "exit_code": 3,
    }


def map_sites() -> list[dict]:
    rows = []
    for wafer in ("LK-0412-03", "LK-0412-04"):
        for i, (x, y) in enumerate([(0, 0), (30, 0), (-30, 0), (0, 30), (0, -30), (60, 0), (-60, 0)], start=1):
            t = 149.0 + 0.0005 * (x * x + y * y) - (5.5 if wafer.endswith("04") and abs(x) == 60 else 0.0)
            rows.append({"site": i, "x_mm": x, "y_mm": y, "wafer": wafer, "status": "fitted",
                         "pass": "true" if 146.0 <= t <= 152.0 else "false", "reduced_chi2": 1.02,
                         "oxide.thickness_nm": round(t, 3), "oxide.thickness_nm.stderr": 0.05, "reason": ""})
    rows[-1].update({"status": "failed", "pass": "", "reduced_chi2": "", "oxide.thickness_nm": "",
                     "oxide.thickness_nm.stderr": "", "reason": "non-numeric psi_deg at line 812"})
    return rows


def write_map_dir(out: Path, summary: dict, sites: list[dict]) -> None:
    out.mkdir(exist_ok=True)
    (out / "summary.json").write_text(json.dumps(summary, indent=2))
    with (out / "sites.csv").open("w", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(sites[0]))
        writer.writeheader()
        writer.writerows(sites)


@pytest.fixture
def map_dir(tmp_path) -> Path:
    out = tmp_path / "map_out"
    write_map_dir(out, map_summary(), map_sites())
    write_plot(out / "map_oxide.thickness_nm.png", "oxide thickness")
    return out


def check_json() -> dict:
    return {
        "pass": False,
        "design": {"pass": True,
                   "bands": [{"name": "visible anti-reflection", "pass": True, "worst_margin": 0.0011, "at_nm": 452.0},
                             {"name": "near-infrared", "pass": True, "worst_margin": 0.004, "at_nm": 900.0}],
                   "color": {"L": 28.1, "a": 0.8, "b": -6.2, "delta_e": 1.9, "max_delta_e": 3.0, "pass": True}},
        "sensitivity": {
            "method": "central differences, step 0.5 nm, one batched solver call",
            "tolerance_basis": "thickness tolerance",
            "layers": {
                "H1": {"tolerance_nm": 0.15, "criticality": 0.165,
                       "bands": {"visible anti-reflection": {"max_abs_derivative": 0.0110, "unit": "per nm",
                                                             "at_nm": 531.0, "shift_at_tolerance": 0.00165,
                                                             "criticality": 0.165}}},
                "H2": {"tolerance_nm": 1.1, "criticality": 0.612,
                       "bands": {"visible anti-reflection": {"max_abs_derivative": 0.00556, "unit": "per nm",
                                                             "at_nm": 534.0, "shift_at_tolerance": 0.00612,
                                                             "criticality": 0.612},
                                 "color": {"max_abs_derivative": 0.29, "unit": "Delta E per nm", "at_nm": None,
                                           "shift_at_tolerance": 0.32, "criticality": 0.0107}}},
            },
            "ranking": ["H2", "H1"],
        },
        "yield": {"trials": 10000, "pass_fraction": 0.9132, "ci95": [0.9075, 0.9186],
                  "worst_layer": "H2", "min_yield": 0.9, "pass": True},
        "measured": {"pass": False,
                     "bands": [{"name": "visible anti-reflection", "pass": False, "worst_margin": -0.0023,
                                "at_nm": 640.0}],
                     "drift": {"L1.thickness_nm": {"design": 110.0, "fitted": 110.4, "stderr": 0.3,
                                                   "delta_nm": 0.4, "delta_pct": 0.36},
                               "H2.thickness_nm": {"design": 52.0, "fitted": 54.61, "stderr": 0.21,
                                                   "delta_nm": 2.61, "delta_pct": 5.02}},
                     "largest": "H2.thickness_nm", "prefit_scale": 1.012,
                     "fit": {"converged": True, "statistics": {"reduced_chi2": 1.08}, "warnings": []},
                     "files": ["ar4_part_0412.csv"]},
        "notes": [],
        "provenance": {"lamina": "0.1.0", "recipe": "ar4_recipe.toml", "target": "ar4_target.toml",
                       "sha256": {"ar4_recipe.toml": "c1" * 32, "ar4_target.toml": "d2" * 32},
                       "created": "2026-12-01T23:20:00+00:00"},
    }


@pytest.fixture
def check_dir(tmp_path) -> Path:
    out = tmp_path / "check_out"
    out.mkdir()
    (out / "check.json").write_text(json.dumps(check_json(), indent=2))
    write_plot(out / "check_bands.png", "reflectance vs bands")
    return out


@pytest.fixture(scope="session")
def samples():
    """This module's builders (tests cannot import conftest under --import-mode=importlib)."""
    import sys
    return sys.modules[__name__]
