"""`lamina map` as a user runs it: files in, OUTDIR out, exit codes 0/1/2/3.

The map is the 49-site oxide map computed with the `tmm` package (Byrnes 2016,
arXiv:1603.02720) with the known profile t(r) = 150 + 3 (r/70)^2 nm; see
tests/qa/test_maps_support.py.  Wavelengths are kept few (20) so the runs stay short.
"""
from __future__ import annotations

import csv
import importlib.util
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from lamina.cli.main import main

_SUPPORT = Path(__file__).parents[1] / "qa" / "test_maps_support.py"
_spec = importlib.util.spec_from_file_location("lamina_map_cli_support", _SUPPORT)
support = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(support)

WAVELENGTH_NM = np.linspace(420.0, 780.0, 20)
ANGLE_DEG = (70.0,)
SPEC = """[wafer]
diameter_mm = 150
edge_exclusion_mm = 5

[limits."oxide.thickness_nm"]
lower = 146.0
upper = 151.0

[uniformity."oxide.thickness_nm"]
max_nonuniformity_pct = 2.0
"""
PASSING_SPEC = SPEC.replace("upper = 151.0", "upper = 152.0")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("mapcli")
    rows, truth = support.make_map_rows(WAVELENGTH_NM, ANGLE_DEG, seed=3)
    (folder / "oxide.toml").write_text(support.oxide_model_toml())
    (folder / "spec.toml").write_text(SPEC)
    (folder / "pass.toml").write_text(PASSING_SPEC)
    return {"folder": folder, "map": support.write_map_csv(folder / "map.csv", rows), "rows": rows, "truth": truth}


@pytest.fixture(scope="module")
def cluster():
    import logging
    from distributed import LocalCluster
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                      silence_logs=logging.ERROR) as local:
        yield local


def run_map(files, out, *extra, spec="spec.toml", mapfile=None):
    argv = ["map", str(mapfile or files["map"]), "--model", str(files["folder"] / "oxide.toml"), "--quiet",
            "-o", str(out), *extra]
    if spec:
        argv[4:4] = ["--spec", str(files["folder"] / spec)]
    return main(argv)


def read_sites(out):
    with (out / "sites.csv").open(newline="") as handle:
        return list(csv.DictReader(handle))


@pytest.fixture(scope="module")
def one_worker_run(files, tmp_path_factory):
    out = tmp_path_factory.mktemp("one")
    code = run_map(files, out, "--workers", "1")
    return code, out


def test_local_cluster_run_writes_every_output_and_fails_the_spec(one_worker_run, files):
    code, out = one_worker_run
    assert code == 1  # ring r = 48 mm has t = 151.41 nm > 151 (known profile)
    for name in ("sites.csv", "results.nc", "summary.json", "map_oxide.thickness_nm.png",
                 "histogram_oxide.thickness_nm.png", "radial_oxide.thickness_nm.png"):
        assert (out / name).stat().st_size > 0, name
    assert not list(out.glob(".*tmp*"))  # atomic writes leave no temporary files
    assert not (out / "wafers.csv").exists()  # one wafer: no per-wafer table


def test_sites_csv_has_the_documented_columns_and_values(one_worker_run, files):
    _, out = one_worker_run
    sites = read_sites(out)
    assert list(sites[0]) == ["site", "x_mm", "y_mm", "status", "pass", "reduced_chi2", "oxide.thickness_nm",
                              "oxide.thickness_nm.stderr", "reason"]
    assert len(sites) == 49
    for row in sites:
        assert row["status"] == "fitted" and row["reason"] == ""
        assert abs(float(row["oxide.thickness_nm"]) - files["truth"][row["site"]]) < 0.3
        radius = np.hypot(float(row["x_mm"]), float(row["y_mm"]))
        expected = "" if radius > 70.001 else ("false" if files["truth"][row["site"]] > 151.0 else "true")
        assert row["pass"] == expected


def test_summary_json_reports_statistics_inside_the_exclusion(one_worker_run):
    _, out = one_worker_run
    summary = json.loads((out / "summary.json").read_text())
    wafer = summary["wafers"]["1"]
    stats = wafer["parameters"]["oxide.thickness_nm"]
    assert stats["n_sites"] == 25 and stats["unit"] == "nm"
    for key in ("mean", "std", "min", "max", "range", "nonuniformity_pct", "std_over_mean_pct"):
        assert isinstance(stats[key], float)
    assert stats["nonuniformity_pct"] == pytest.approx(100 * stats["range"] / (2 * stats["mean"]))
    assert wafer["pass"] is False and wafer["reasons"]
    assert summary["n_failed"] == 0 and summary["exit_code"] == 1


def test_results_nc_holds_the_same_numbers(one_worker_run):
    from lamina.data.readers import open_netcdf
    _, out = one_worker_run
    results = open_netcdf(out / "results.nc")
    sites = read_sites(out)
    assert results.sizes["site"] == 49
    np.testing.assert_allclose(results["oxide.thickness_nm"].values,
                               [float(row["oxide.thickness_nm"]) for row in sites], rtol=1e-12)


def test_scheduler_address_gives_the_same_results_as_one_worker(one_worker_run, files, cluster, tmp_path):
    _, one = one_worker_run
    code = run_map(files, tmp_path, "--scheduler", cluster.scheduler_address)
    assert code == 1
    first, second = read_sites(one), read_sites(tmp_path)
    assert [r["site"] for r in first] == [r["site"] for r in second]
    np.testing.assert_allclose([float(r["oxide.thickness_nm"]) for r in second],
                               [float(r["oxide.thickness_nm"]) for r in first], rtol=0, atol=1e-9)
    assert [r["pass"] for r in first] == [r["pass"] for r in second]


def test_passing_spec_exits_0_and_no_spec_exits_0(files, cluster, tmp_path):
    assert run_map(files, tmp_path / "a", "--scheduler", cluster.scheduler_address, spec="pass.toml") == 0
    assert run_map(files, tmp_path / "b", "--scheduler", cluster.scheduler_address, spec=None) == 0
    summary = json.loads((tmp_path / "b" / "summary.json").read_text())
    assert summary["wafers"]["1"]["pass"] is None and summary["spec"] is None
    assert {row["pass"] for row in read_sites(tmp_path / "b")} == {""}


def test_corrupt_site_is_reported_and_the_rest_completes_with_exit_3(files, cluster, tmp_path):
    rows = [dict(row) for row in files["rows"]]
    target = next(i for i, row in enumerate(rows) if row["site"] == "20")
    rows[target]["psi_deg"] = "12.x"
    mapfile = support.write_map_csv(tmp_path / "corrupt.csv", rows)
    code = run_map(files, tmp_path / "out", "--scheduler", cluster.scheduler_address, mapfile=mapfile)
    assert code == 3  # 3 wins over the spec failure (1) that this map also has
    sites = read_sites(tmp_path / "out")
    failed = [row for row in sites if row["status"] == "failed"]
    assert [row["site"] for row in failed] == ["20"]
    assert f"corrupt.csv:{target + 2}" in failed[0]["reason"] and "psi_deg" in failed[0]["reason"]
    assert failed[0]["oxide.thickness_nm"] == "" and failed[0]["pass"] == ""
    assert sum(row["status"] == "fitted" for row in sites) == 48
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert summary["n_failed"] == 1 and summary["exit_code"] == 3


def test_several_wafers_give_a_wafer_table_and_trend_plot(files, cluster, tmp_path):
    labels, x_mm, y_mm = support.site_layout()
    rows = []
    for wafer, seed in (("W01", 5), ("W02", 6)):
        part, _ = support.make_map_rows(WAVELENGTH_NM, ANGLE_DEG, seed=seed, wafer=wafer,
                                        labels=labels[:9], x_mm=x_mm[:9], y_mm=y_mm[:9])
        rows += part
    mapfile = support.write_map_csv(tmp_path / "lot.csv", rows)
    assert run_map(files, tmp_path / "out", "--scheduler", cluster.scheduler_address, mapfile=mapfile) == 0
    out = tmp_path / "out"
    with (out / "wafers.csv").open(newline="") as handle:
        table = list(csv.DictReader(handle))
    assert [row["wafer"] for row in table] == ["W01", "W02"] and {row["pass"] for row in table} == {"true"}
    assert (out / "trend_oxide.thickness_nm.png").exists()
    assert (out / "map_oxide.thickness_nm_W01.png").exists() and (out / "map_oxide.thickness_nm_W02.png").exists()
    assert "wafer" in read_sites(out)[0]
    assert len(read_sites(out)) == 18


@pytest.mark.parametrize("spec_text, message", [
    ("[wafer]\ndiameter_mm = 150\ncolour = 'red'\n", "wafer.colour"),
    ('[limits."oxide.n"]\nlower = 1\n', 'limits."oxide.n"'),
    ('[limits."oxide.thickness_nm"]\nlower = 152\nupper = 146\n', 'limits."oxide.thickness_nm"'),
    ('[uniformity."oxide.thickness_nm"]\nmax_range_pct = 2\n', "max_range_pct"),
    ("[tolerances]\nx = 1\n", "tolerances"),
])
def test_bad_spec_exits_2_naming_file_and_key(files, tmp_path, capsys, spec_text, message):
    (tmp_path / "bad.toml").write_text(spec_text)
    argv = ["map", str(files["map"]), "--model", str(files["folder"] / "oxide.toml"), "--spec",
            str(tmp_path / "bad.toml"), "-o", str(tmp_path / "out")]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "bad.toml" in err and message in err and "Traceback" not in err
    assert len(err.strip().splitlines()) <= 2
    assert not (tmp_path / "out").exists()  # bad input leaves no output folder behind


def test_bad_map_exits_2_from_the_command_line(files, tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("site,x_mm,wavelength_nm,angle_deg,psi_deg\n1,0,500,70,30\n")
    result = subprocess.run([sys.executable, "-m", "lamina.cli", "map", str(bad), "--model",
                             str(files["folder"] / "oxide.toml"), "-o", str(tmp_path / "out")],
                            capture_output=True, text=True)
    assert result.returncode == 2
    assert "bad.csv:1" in result.stderr and "y_mm" in result.stderr and "Traceback" not in result.stderr
    assert not (tmp_path / "out").exists()


def test_workers_and_scheduler_are_exclusive(files, tmp_path):
    with pytest.raises(SystemExit) as info:
        run_map(files, tmp_path, "--workers", "2", "--scheduler", "tcp://127.0.0.1:1")
    assert info.value.code == 2


def test_an_output_never_overwrites_an_input(files, tmp_path, capsys):
    mapfile = tmp_path / "sites.csv"
    mapfile.write_bytes(files["map"].read_bytes())
    before = mapfile.read_bytes()
    argv = ["map", str(mapfile), "--model", str(files["folder"] / "oxide.toml"), "-o", str(tmp_path)]
    assert main(argv) == 2
    assert "would overwrite" in capsys.readouterr().err
    assert mapfile.read_bytes() == before
