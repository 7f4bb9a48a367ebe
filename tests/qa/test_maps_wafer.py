"""Wafer geometry, map statistics, spec files and map plots (no cluster needed)."""
from __future__ import annotations

import math

import numpy as np
import pytest
import xarray as xr

from lamina.errors import LaminaInputError
from lamina.qa import maps
from lamina.qa.specs import parse_spec, read_spec
from lamina.qa.wafer import (NOTCH_DEPTH_MM, WaferGeometry, guess_geometry, map_statistics, reference_site)

FREE = ["oxide.thickness_nm", "oxide.material.n"]


def test_statistics_match_a_hand_calculation():
    # hand calculation: mean 100.5; sample variance (2.25 + 0.25 + 0.25 + 2.25) / 3 = 5/3
    stats = map_statistics([99.0, 100.0, 101.0, 102.0, math.nan])
    assert stats["n_sites"] == 4
    assert stats["mean"] == pytest.approx(100.5)
    assert stats["std"] == pytest.approx(math.sqrt(5.0 / 3.0))
    assert stats["range"] == pytest.approx(3.0)
    # nonuniformity (common practice): (max - min) / (2 mean) = 3 / 201
    assert stats["nonuniformity_pct"] == pytest.approx(100 * 3.0 / 201.0)
    assert stats["std_over_mean_pct"] == pytest.approx(100 * math.sqrt(5.0 / 3.0) / 100.5)


def test_statistics_of_one_and_of_no_site():
    one = map_statistics([150.0])
    assert one["std"] == 0.0 and one["nonuniformity_pct"] == 0.0 and one["n_sites"] == 1
    none = map_statistics([math.nan])
    assert none["n_sites"] == 0 and math.isnan(none["mean"])


def test_edge_exclusion_zone_and_reference_site():
    geometry = WaferGeometry(150.0, 5.0)
    assert geometry.zone_radius_mm == 70.0
    assert geometry.in_zone([0, 70.0, 70.01, 0], [0, 0, 0, -71]).tolist() == [True, True, False, False]
    x, y = np.array([10.0, 0.5, -3.0]), np.array([0.0, 0.5, 0.0])
    assert reference_site(x, y) == 1
    assert reference_site(x, y, usable=[True, False, True]) == 2


def test_geometry_guess_takes_the_smallest_standard_wafer():
    assert guess_geometry(np.array([0.0, 72.0]), np.array([0.0, 0.0])).diameter_mm == 150.0
    assert guess_geometry(np.array([90.0]), np.array([0.0])).diameter_mm == 200.0


def test_outline_is_a_circle_with_a_notch_at_the_bottom():
    geometry = WaferGeometry(150.0, 5.0)
    x, y = geometry.outline()
    radius = np.hypot(x, y)
    assert radius.max() == pytest.approx(75.0)
    tip = np.argmin(radius)
    assert x[tip] == pytest.approx(0.0) and y[tip] == pytest.approx(-75.0 + NOTCH_DEPTH_MM)
    assert y.min() > -75.0  # the notch cuts the bottom of the circle


def test_spec_file_reads_the_documented_schema(tmp_path):
    path = tmp_path / "spec.toml"
    path.write_text('[wafer]\ndiameter_mm = 200\nedge_exclusion_mm = 3\n'
                    '[limits."oxide.thickness_nm"]\nlower = 146.0\n'
                    '[uniformity."oxide.thickness_nm"]\nmax_nonuniformity_pct = 2.0\nmax_std_over_mean_pct = 1\n')
    spec = read_spec(path, FREE)
    assert spec.geometry == WaferGeometry(200.0, 3.0)
    assert spec.limits == {"oxide.thickness_nm": (146.0, math.inf)}
    assert spec.uniformity["oxide.thickness_nm"] == {"max_nonuniformity_pct": 2.0, "max_std_over_mean_pct": 1.0}


@pytest.mark.parametrize("text, where", [
    ("[wafer]\ndiameter = 150\n", "s.toml: wafer.diameter"),
    ("[limts]\n", "s.toml: limts"),
    ('[limits."oxide.thickness"]\nlower = 1\n', 's.toml: limits."oxide.thickness"'),
    ('[limits."oxide.thickness_nm"]\nlower = 5\nupper = 4\n', 's.toml: limits."oxide.thickness_nm"'),
    ('[limits."oxide.thickness_nm"]\nlower = "five"\n', 's.toml: limits."oxide.thickness_nm".lower'),
    ('[limits."oxide.thickness_nm"]\n', 's.toml: limits."oxide.thickness_nm"'),
    ('[uniformity."oxide.thickness_nm"]\nmax_nonuniformity_pct = -1\n', "max_nonuniformity_pct"),
    ("[wafer]\nedge_exclusion_mm = 80\n", "s.toml: wafer.edge_exclusion_mm"),
    ("[wafer\n", "s.toml"),
])
def test_spec_errors_name_the_file_and_key(text, where):
    with pytest.raises(LaminaInputError) as info:
        parse_spec(text, "s.toml", FREE)
    assert where in str(info.value)


def test_toml_syntax_error_names_the_line():
    with pytest.raises(LaminaInputError, match=r"line 2"):
        parse_spec("[wafer]\ndiameter_mm = = 3\n", "s.toml", FREE)


def _results(n_sites=9, fail_index=None):
    angles = np.linspace(0, 2 * math.pi, n_sites, endpoint=False)
    x = np.r_[0.0, 40 * np.cos(angles[1:])]
    y = np.r_[0.0, 40 * np.sin(angles[1:])]
    data = xr.Dataset(coords={"site": ("site", [str(i + 1) for i in range(n_sites)]), "x_mm": ("site", x),
                              "y_mm": ("site", y), "wafer": ("site", ["1"] * n_sites)})
    data["site_problem"] = ("site", [""] * n_sites)
    outcomes = [{"index": i, "status": "fitted", "reduced_chi2": 1.0,
                 "values": {"oxide.thickness_nm": 100 + 0.01 * (x[i] ** 2 + y[i] ** 2) ** 0.5},
                 "stderr": {"oxide.thickness_nm": 0.01}, "reason": ""} for i in range(n_sites)]
    if fail_index is not None:
        outcomes[fail_index] = maps._failed(fail_index, "broken")
    spec = parse_spec('[limits."oxide.thickness_nm"]\nupper = 100.3\n', "s.toml", FREE)
    return maps.results_dataset(data, outcomes, ["oxide.thickness_nm"], WaferGeometry(150, 5), spec,
                                {"oxide.thickness_nm": "nm"})


@pytest.mark.parametrize("n_sites", [2, 9])
def test_wafer_map_plots_are_png_files(tmp_path, n_sites):
    from lamina.report import plots_map
    results = _results(n_sites, fail_index=1)
    geometry = WaferGeometry(150, 5)
    for path in (plots_map.wafer_map(tmp_path / "map.png", results, "oxide.thickness_nm", geometry, "nm",
                                     limits=(-math.inf, 100.3)),
                 plots_map.histogram(tmp_path / "hist.png", results, "oxide.thickness_nm", "nm"),
                 plots_map.radial_profile(tmp_path / "radial.png", results, "oxide.thickness_nm", geometry, "nm")):
        assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(tmp_path.glob(".*"))


def test_site_verdicts_and_wafer_reasons():
    results = _results(9, fail_index=3)
    # sites at 40 mm have t = 100.4 > 100.3: they fail; the centre passes; the failed site is not judged
    assert results["pass"].values.tolist() == [1, 0, 0, -1, 0, 0, 0, 0, 0]
    summary = maps.summarize(results, ["oxide.thickness_nm"], parse_spec(
        '[limits."oxide.thickness_nm"]\nupper = 100.3\n', "s.toml", FREE))
    reasons = summary["wafers"]["1"]["reasons"]
    assert any("could not be fitted" in r for r in reasons)
    assert any("7 of 8 sites outside" in r for r in reasons)
    assert maps.exit_code(summary) == 3
