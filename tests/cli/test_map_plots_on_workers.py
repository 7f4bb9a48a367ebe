"""`lamina map` draws its plots as tasks on the dask workers: the files must be exactly
the ones drawn in this process from the same results, and none may be missing.

The map is a small oxide map computed with the `tmm` package (Byrnes 2016,
arXiv:1603.02720), see tests/qa/test_maps_support.py.
"""
from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import numpy as np
import xarray as xr

from lamina.cli import map_cmd
from lamina.cli.main import main
from lamina.qa.wafer import WaferGeometry

_SUPPORT = Path(__file__).parents[1] / "qa" / "test_maps_support.py"
_spec = importlib.util.spec_from_file_location("lamina_map_plot_support", _SUPPORT)
support = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(support)

SPEC = '[wafer]\ndiameter_mm = 150\nedge_exclusion_mm = 5\n\n[limits."oxide.thickness_nm"]\nlower = 146.0\n' \
       'upper = 151.0\n'


def test_plots_drawn_on_the_workers_equal_plots_drawn_here(tmp_path):
    rows, _ = support.make_map_rows(np.linspace(450.0, 750.0, 12), (70.0,), seed=5)
    mapfile = support.write_map_csv(tmp_path / "map.csv", rows)
    (tmp_path / "oxide.toml").write_text(support.oxide_model_toml())
    (tmp_path / "spec.toml").write_text(SPEC)
    out = tmp_path / "out"
    code = main(["map", str(mapfile), "--model", str(tmp_path / "oxide.toml"), "--spec", str(tmp_path / "spec.toml"),
                 "--workers", "2", "--quiet", "-o", str(out)])
    assert code in (0, 1)
    summary = json.loads((out / "summary.json").read_text())
    with xr.open_dataset(out / "results.nc", engine="scipy") as stored:
        results = stored.load()
    from lamina.qa.specs import read_spec
    spec = read_spec(str(tmp_path / "spec.toml"), ["oxide.thickness_nm"])
    here = tmp_path / "here"
    here.mkdir()
    map_cmd.write_plots(here, results, summary, ["oxide.thickness_nm"], {"oxide.thickness_nm": "nm"},
                        WaferGeometry(150, 5), spec)
    drawn_here = sorted(p.name for p in here.glob("*.png"))
    assert drawn_here == ["histogram_oxide.thickness_nm.png", "map_oxide.thickness_nm.png",
                          "radial_oxide.thickness_nm.png"]
    assert sorted(p.name for p in out.glob("*.png")) == drawn_here
    for name in drawn_here:
        png = (out / name).read_bytes()
        assert png[:8] == b"\x89PNG\r\n\x1a\n"
        assert png == (here / name).read_bytes(), name
    assert not list(out.glob(".*")) and not list(out.glob("*.tmp*"))  # every file renamed into place


def test_render_returns_the_bytes_a_path_call_writes(tmp_path):
    from lamina.report import plots_map
    results = xr.Dataset({"oxide.thickness_nm": ("site", [100.0, 100.2, 100.4]),
                          "in_zone": ("site", np.array([1, 1, 0], dtype=np.int8))})
    written = plots_map.histogram(tmp_path / "h.png", results, "oxide.thickness_nm", "nm", (99.0, 101.0))
    assert plots_map.render("histogram", results, "oxide.thickness_nm", "nm", (99.0, 101.0)) == written.read_bytes()
