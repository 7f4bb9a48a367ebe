"""The bundled sample data: valid, small, reproducible, honest about being invented, and fittable."""
from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest

import lamina
from lamina.data import sample_path

ROOT = Path(__file__).resolve().parents[2]
MINE = ["oxide_on_si.toml", "oxide_on_si_ellips.csv", "nitride_on_si.toml", "nitride_on_si_ellips.csv",
        "nitride_on_si_reflectance.csv", "absorber_on_glass.toml", "absorber_on_glass_rt.csv"]


def load_generator():
    spec = importlib.util.spec_from_file_location("make_sample_data", ROOT / "tools" / "make_sample_data.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up here
    try:
        spec.loader.exec_module(module)
    finally:
        sys.modules.pop(spec.name, None)
    return module


def test_files_exist_are_small_and_the_root_link_points_here():
    total = sum(sample_path(name).stat().st_size for name in MINE)
    assert total < 200_000
    assert (ROOT / "sample_data").resolve() == sample_path().resolve()


def test_readme_says_the_data_is_invented():
    text = sample_path("README.md").read_text(encoding="utf-8")
    assert "invented for demonstration" in text and "fictitious" in text
    for name in MINE:
        assert f"`{name}`" in text, name


@pytest.mark.parametrize("name", [n for n in MINE if n.endswith(".csv")])
def test_measurement_files_read_and_say_they_are_synthetic(name):
    ds = lamina.read_data(sample_path(name))
    assert ds.attrs["data_kind"] == "synthetic"
    assert "invented" in ds.attrs["scenario"]
    model = lamina.load_model(sample_path(ds.attrs["model_file"]))
    model.check_range(ds["wavelength"].values)


def test_generator_reproduces_the_files():
    assert load_generator().main(["--check"]) == 0


@pytest.mark.parametrize("model, files", [
    ("oxide_on_si.toml", ["oxide_on_si_ellips.csv"]),
    ("nitride_on_si.toml", ["nitride_on_si_ellips.csv", "nitride_on_si_reflectance.csv"]),
    ("absorber_on_glass.toml", ["absorber_on_glass_rt.csv"]),
])
def test_fits_recover_the_true_values_in_the_headers(model, files):
    stack = lamina.load_model(sample_path(model))
    data = lamina.read_data([sample_path(f) for f in files])
    result = lamina.fit(stack, data).to_dict()
    assert result["converged"]
    assert 0.5 < result["statistics"]["reduced_chi2"] < 2.0  # the noise is what the files say it is
    truth = {k[len("true_"):]: float(v) for k, v in data.attrs.items() if k.startswith("true_")}
    assert set(truth) == set(stack.free_parameters())
    for name, value in truth.items():
        fitted = result["parameters"][name]
        # within 4 standard errors: a wrong model or a data bug would be far outside
        assert abs(fitted["value"] - value) < 4 * fitted["stderr"] + 1e-9, (name, fitted, value)
    assert np.isfinite(result["statistics"]["reduced_chi2"])


def test_generator_check_notices_a_changed_value(tmp_path):
    generator = load_generator()
    current = sample_path("oxide_on_si_ellips.csv")
    lines = current.read_text(encoding="utf-8").splitlines()
    first = next(i for i, line in enumerate(lines) if line[:1].isdigit())
    cells = lines[first].split(",")
    cells[2] = repr(float(cells[2]) + 1e-6)  # psi of the first point, 1e-6 deg off
    lines[first] = ",".join(cells)
    changed = tmp_path / current.name
    changed.write_text("\n".join(lines) + "\n", encoding="utf-8")
    assert generator.same_data(current, current)
    assert not generator.same_data(current, changed)
