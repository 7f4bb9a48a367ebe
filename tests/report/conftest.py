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
    stats = {"mean": 149.12, "std": 0.84, "min": 147.6, "max": 151.9, "range": 4.3,
             "nonuniformity_pct": 1.44, "std_over_mean_pct": 0.56, "n_sites": 7, "unit": "nm"}
    return {
        "wafers": {
            "LK-0412-03": {"pass": True, "reasons": [], "n_sites": 7, "n_failed": 0,
                           "parameters": {"oxide.thickness_nm": stats}},
            "LK-0412-04": {"pass": False,
                           "reasons": ["oxide.thickness_nm: 2 sites below lower limit 146.0 nm",
                                       "oxide.thickness_nm: non-uniformity 2.9 % above 2.0 %"],
                           "n_sites": 7, "n_failed": 1,
                           "parameters": {"oxide.thickness_nm": dict(stats, mean=147.3, nonuniformity_pct=2.9)}},
        },
        "failed_sites": 1,
        "pass": False,
        "provenance": {"lamina": "0.1.0", "data_sha256": {"lot0412_map.csv": "ab" * 32},
                       "model": "oxide_on_si.toml", "spec": "oxide_spec.toml", "created": "2026-12-01T23:10:00Z"},
    }


def map_sites() -> list[dict]:
    rows = []
    for wafer in ("LK-0412-03", "LK-0412-04"):
        for i, (x, y) in enumerate([(0, 0), (30, 0), (-30, 0), (0, 30), (0, -30), (60, 0), (-60, 0)], start=1):
            t = 149.0 + 0.0005 * (x * x + y * y) - (5.5 if wafer.endswith("04") and abs(x) == 60 else 0.0)
            rows.append({"site": i, "x_mm": x, "y_mm": y, "wafer": wafer, "status": "ok",
                         "pass": str(146.0 <= t <= 152.0), "reduced_chi2": 1.02,
                         "oxide.thickness_nm": round(t, 3), "oxide.thickness_nm.stderr": 0.05, "reason": ""})
    rows[-1].update({"status": "failed", "pass": "False", "reduced_chi2": "", "oxide.thickness_nm": "",
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
        "sensitivity": {"H1.thickness_nm": {"visible anti-reflection": 0.00041, "near-infrared": 0.00012},
                        "L1.thickness_nm": {"visible anti-reflection": 0.00022, "near-infrared": 0.00009}},
        "yield": {"trials": 10000, "pass_fraction": 0.9132, "ci95": [0.9075, 0.9186],
                  "worst_layer": "H2", "min_yield": 0.9, "pass": True},
        "measured": {"pass": False,
                     "bands": [{"name": "visible anti-reflection", "pass": False, "worst_margin": -0.0023,
                                "at_nm": 640.0}],
                     "drift": {"L1.thickness_nm": {"design": 110.0, "fitted": 110.4, "stderr": 0.3,
                                                   "delta_nm": 0.4, "delta_pct": 0.36},
                               "H2.thickness_nm": {"design": 52.0, "fitted": 54.61, "stderr": 0.21,
                                                   "delta_nm": 2.61, "delta_pct": 5.02}}},
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
