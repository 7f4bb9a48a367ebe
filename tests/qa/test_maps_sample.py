"""The bundled sample wafer map (invented data) is current, readable and consistent with its model and spec."""
from __future__ import annotations

import importlib.util
from pathlib import Path

import lamina
from lamina.qa import maps, specs

ROOT = Path(__file__).parents[2]
SAMPLE = ROOT / "src" / "lamina" / "sample_data" / "maps"


def _generator():
    spec = importlib.util.spec_from_file_location("make_sample_map", ROOT / "tools" / "make_sample_map.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_the_generator_reproduces_the_sample_map():
    assert _generator().main(["--check"]) == 0


def test_sample_map_model_and_spec_fit_together():
    stack = lamina.load_model(SAMPLE / "oxide_map_model.toml")
    spec = specs.read_spec(SAMPLE / "oxide_map_spec.toml", stack.free_parameters())
    data = maps.read_map(SAMPLE / "oxide_map.csv")
    assert dict(data.sizes) == {"site": 66, "angle": 1, "wavelength": 31}
    assert sorted(set(data["wafer"].values.tolist())) == ["LK-0412-07", "LK-0412-08"]
    assert (data["site_problem"].values == "").all()
    maps.check_on_wafer(data, spec.geometry)
    stack.check_range(data["wavelength"].values)
    assert "INVENTED DATA" in (SAMPLE / "oxide_map.csv").read_text().splitlines()[0]
