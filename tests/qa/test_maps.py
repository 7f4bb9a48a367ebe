"""Wafer maps end to end on a real dask cluster: a 49-site oxide map computed with tmm.

Reference: the spectra come from the `tmm` package (Byrnes 2016, arXiv:1603.02720),
independent of lamina's optics; the true thickness at each site is the known profile
t(r) = 150 + 3 (r / 70)^2 nm (see test_maps_support.py).  Uniformity figures are
re-computed by hand here from the definitions (common practice: half-range over mean,
sigma over mean).
"""
from __future__ import annotations

import importlib.util
import math
from pathlib import Path

import numpy as np
import pytest

from lamina.errors import LaminaInputError
from lamina.qa import maps, specs
from lamina.qa.wafer import WaferGeometry

_SUPPORT = Path(__file__).with_name("test_maps_support.py")
_spec = importlib.util.spec_from_file_location("lamina_map_test_support", _SUPPORT)
support = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(support)

WAVELENGTH_NM = np.linspace(400.0, 800.0, 30)
ANGLE_DEG = (70.0,)
LOWER_NM, UPPER_NM = 146.0, 151.0
GEOMETRY = WaferGeometry(150.0, 5.0)  # zone radius 70 mm: rings 0, 24, 48 in, ring 72 out


@pytest.fixture(scope="module")
def synthetic(tmp_path_factory):
    folder = tmp_path_factory.mktemp("map49")
    rows, truth = support.make_map_rows(WAVELENGTH_NM, ANGLE_DEG, seed=11)
    path = support.write_map_csv(folder / "map49.csv", rows)
    return {"path": path, "rows": rows, "truth": truth, "folder": folder}


@pytest.fixture(scope="module")
def two_workers():
    with maps.dask_client(workers=2) as client:
        yield client


@pytest.fixture(scope="module")
def fitted(synthetic, two_workers):
    dataset = maps.read_map(synthetic["path"])
    outcomes = maps.fit_map(support.oxide_stack(), dataset, two_workers)
    spec = specs.Spec(GEOMETRY, {"oxide.thickness_nm": (LOWER_NM, UPPER_NM)},
                      {"oxide.thickness_nm": {"max_nonuniformity_pct": 2.0}})
    results = maps.results_dataset(dataset, outcomes, ["oxide.thickness_nm"], GEOMETRY, spec,
                                   {"oxide.thickness_nm": "nm"})
    return {"dataset": dataset, "outcomes": outcomes, "results": results, "spec": spec,
            "summary": maps.summarize(results, ["oxide.thickness_nm"], spec)}


def test_the_cluster_really_has_two_worker_processes(two_workers):
    info = two_workers.scheduler_info()
    assert len(info["workers"]) == 2
    pids = two_workers.run(lambda: __import__("os").getpid())
    assert len(set(pids.values())) == 2


def test_read_map_gives_site_angle_wavelength(fitted):
    dataset = fitted["dataset"]
    assert dict(dataset.sizes) == {"site": 49, "angle": 1, "wavelength": 30}
    assert dataset["psi"].dims == ("site", "angle", "wavelength")
    assert (dataset["site_problem"].values == "").all()
    assert dataset["x_mm"].values[0] == 0.0 and dataset["y_mm"].values[0] == 0.0


def test_every_site_is_within_0p3_nm_of_the_known_profile(fitted, synthetic):
    results = fitted["results"]
    assert (results["status"].values == "fitted").all()
    truth = np.array([synthetic["truth"][label] for label in results["site"].values])
    error = results["oxide.thickness_nm"].values - truth
    assert np.abs(error).max() < 0.3
    # the noise (0.02 deg Psi, 0.05 deg Delta) and weights match, so chi2/dof is near 1
    assert 0.5 < np.median(results["reduced_chi2"].values) < 2.0


def test_reference_site_is_the_centre_and_fitted_with_global_search(fitted):
    reference = [o for o in fitted["outcomes"] if o["reference"]]
    assert [o["index"] for o in reference] == [0]
    assert reference[0]["global_search"]


def test_the_sites_outside_the_limits_are_the_ones_the_profile_predicts(fitted, synthetic):
    results = fitted["results"]
    radius = np.hypot(results["x_mm"].values, results["y_mm"].values)
    truth = support.true_thickness_nm(radius)
    expected = np.where(radius > 70.0 + 1e-6, -1, ((truth >= LOWER_NM) & (truth <= UPPER_NM)).astype(int))
    assert results["pass"].values.tolist() == expected.tolist()
    assert (expected == 0).sum() == 16 and (expected == 1).sum() == 9 and (expected == -1).sum() == 24
    wafer = fitted["summary"]["wafers"]["1"]
    assert wafer["pass"] is False
    assert any("16 of 25 sites outside [146, 151]" in reason for reason in wafer["reasons"])
    assert maps.exit_code(fitted["summary"]) == 1


def test_uniformity_matches_a_hand_calculation(fitted):
    results = fitted["results"]
    radius = np.hypot(results["x_mm"].values, results["y_mm"].values)
    inside = radius <= 70.0
    values = results["oxide.thickness_nm"].values[inside]
    stats = fitted["summary"]["wafers"]["1"]["parameters"]["oxide.thickness_nm"]
    mean = sum(values) / len(values)
    sigma = math.sqrt(sum((v - mean) ** 2 for v in values) / (len(values) - 1))
    assert stats["n_sites"] == 25
    assert stats["mean"] == pytest.approx(mean, rel=1e-12)
    assert stats["std"] == pytest.approx(sigma, rel=1e-9)
    assert stats["range"] == pytest.approx(max(values) - min(values), rel=1e-12)
    assert stats["nonuniformity_pct"] == pytest.approx(100 * (max(values) - min(values)) / (2 * mean), rel=1e-9)
    assert stats["std_over_mean_pct"] == pytest.approx(100 * sigma / mean, rel=1e-9)
    # and against the known profile: (t(48) - t(0)) / (2 mean_true)
    true_values = support.true_thickness_nm(radius[inside])
    true_pct = 100 * (true_values.max() - true_values.min()) / (2 * true_values.mean())
    assert stats["nonuniformity_pct"] == pytest.approx(true_pct, abs=0.01)


def test_one_worker_gives_the_same_numbers(synthetic, fitted):
    dataset = maps.read_map(synthetic["path"])
    with maps.dask_client(workers=1) as client:
        assert len(client.scheduler_info()["workers"]) == 1
        one = maps.fit_map(support.oxide_stack(), dataset, client, chunk_size=7)
    two = fitted["outcomes"]
    for a, b in zip(one, two):
        assert a["status"] == b["status"]
        assert a["values"]["oxide.thickness_nm"] == pytest.approx(b["values"]["oxide.thickness_nm"], abs=1e-9)


def test_a_site_with_corrupt_values_is_isolated(synthetic, two_workers, tmp_path):
    rows = [dict(row) for row in synthetic["rows"]]
    for row in rows:
        if row["site"] == "7" and row["wavelength_nm"].startswith("5"):
            row["delta_deg"] = "n/a"
            break
    path = support.write_map_csv(tmp_path / "corrupt.csv", rows)
    dataset = maps.read_map(path)
    problem = dataset["site_problem"].values
    assert (problem != "").sum() == 1 and "site '7'" in problem[6] and "delta_deg" in problem[6]
    line = next(i for i, row in enumerate(rows) if row["delta_deg"] == "n/a") + 2  # header is line 1
    assert f"corrupt.csv:{line}" in problem[6]
    assert np.isnan(dataset["psi"].values[6]).all()
    outcomes = maps.fit_map(support.oxide_stack(), dataset, two_workers)
    assert outcomes[6]["status"] == "failed" and "delta_deg" in outcomes[6]["reason"]
    assert sum(o["status"] == "fitted" for o in outcomes) == 48
    results = maps.results_dataset(dataset, outcomes, ["oxide.thickness_nm"], GEOMETRY)
    summary = maps.summarize(results, ["oxide.thickness_nm"])
    assert summary["n_failed"] == 1 and summary["wafers"]["1"]["failed_sites"] == ["7"]
    assert maps.exit_code(summary) == 3


def test_a_site_on_a_different_grid_is_isolated(synthetic, tmp_path):
    drop = next(i for i, row in enumerate(synthetic["rows"]) if row["site"] == "12")
    rows = synthetic["rows"][:drop] + synthetic["rows"][drop + 1:]
    dataset = maps.read_map(support.write_map_csv(tmp_path / "gap.csv", rows))
    problems = dataset["site_problem"].values
    assert (problems != "").sum() == 1 and "differ from the rest of the map" in problems[11]


def test_netcdf_map_reads_like_the_csv(synthetic, tmp_path):
    from lamina.data.writers import write_netcdf_file
    from_csv = maps.read_map(synthetic["path"])
    stored = from_csv.drop_vars("site_problem")
    stored.attrs = {}
    path = write_netcdf_file(stored, tmp_path / "map.nc")
    from_nc = maps.read_map(path)
    assert from_nc["site"].values.tolist() == from_csv["site"].values.tolist()
    np.testing.assert_allclose(from_nc["psi"].values, from_csv["psi"].values)
    np.testing.assert_allclose(from_nc["x_mm"].values, from_csv["x_mm"].values)
    assert (from_nc["site_problem"].values == "").all()


def test_a_failing_fit_is_an_outcome_not_an_exception():
    def broken(stack, data, global_search=False):
        raise RuntimeError("solver blew up")
    outcome, stack = maps.fit_site(None, None, 5, broken, False)
    assert outcome["status"] == "failed" and "solver blew up" in outcome["reason"] and stack is None


def test_chunks_start_from_the_reference_fit_or_from_the_model_when_it_failed():
    def record(stack, data, global_search=False):
        raise RuntimeError(f"started from {stack}")
    seeded = maps.fit_chunk_seeded(({"status": "fitted"}, "reference stack"), "model", [None], [3], record)
    unseeded = maps.fit_chunk_seeded(({"status": "failed"}, None), "model", [None], [3], record)
    assert "started from reference stack" in seeded[0]["reason"]
    assert "started from model" in unseeded[0]["reason"] and unseeded[0]["index"] == 3


def test_chunks_waiting_on_a_lost_reference_task_are_sent_again_unseeded():
    class Future:
        def __init__(self, args):
            self.args, self.cancelled = args, False

        def cancel(self):
            self.cancelled = True

    class Client:
        def submit(self, function, *args, pure=True):
            return Future((function,) + args)

    waiting = Future(("seeded",))
    other = Future(("other wafer",))
    futures = {waiting: [1, 2], other: [7]}
    maps._resubmit_unseeded(Client(), futures, [([1, 2], ["site 1", "site 2"])], "model", "site_fit")
    assert waiting.cancelled and waiting not in futures and futures[other] == [7]
    (again, chunk), = [(f, c) for f, c in futures.items() if f is not other]
    assert chunk == [1, 2] and again.args == (maps.fit_chunk, "model", ["site 1", "site 2"], [1, 2], "site_fit")


def test_outlier_rule_needs_both_five_times_the_median_and_three():
    # common practice for robust re-fitting; thresholds are this project's choice
    outcomes = [{"index": i, "status": "fitted", "reduced_chi2": chi2}
                for i, chi2 in enumerate([1.0, 1.1, 0.9, 1.0, 6.0, 4.0])]
    assert maps.outlier_sites(outcomes) == [4]  # 4.0 < 5 x median (1.05 -> 5.25)
    low = [{"index": i, "status": "fitted", "reduced_chi2": chi2} for i, chi2 in enumerate([0.1, 0.1, 0.1, 2.0])]
    assert maps.outlier_sites(low) == []  # 2.0 > 5 x 0.1 but below the floor of 3


@pytest.mark.parametrize("text, where", [
    ("site,x_mm,wavelength_nm,angle_deg,psi_deg\n1,0,500,70,30\n", "missing column 'y_mm'"),
    ("site,x_mm,y_mm,wavelength_nm,angle_deg,psi_deg\n1,0,0,500,70,30\n1,0,1,600,70,31\n", ":3: columns x_mm"),
    ("site,x_mm,y_mm,wavelength_nm,angle_deg,psi_deg\n1,zero,0,500,70,30\n", ":2: column 2 (x_mm)"),
    ("site,x_mm,y_mm,wavelength_nm,angle_deg,psi_deg\n,0,0,500,70,30\n", ":2: column 1 (site)"),
    ("site,x_mm,y_mm,wavelength_nm,angle_deg,psi_deg\n1,0,0,500,70,abc\n", "no site can be read"),
])
def test_a_broken_file_is_bad_input_naming_the_place(tmp_path, text, where):
    path = tmp_path / "broken.csv"
    path.write_text(text)
    before = path.read_bytes()
    with pytest.raises(LaminaInputError) as info:
        maps.read_map(path)
    assert where in str(info.value) and "broken.csv" in str(info.value)
    assert path.read_bytes() == before  # never a changed input file


def test_a_site_off_the_wafer_is_bad_input(synthetic):
    dataset = maps.read_map(synthetic["path"])
    with pytest.raises(LaminaInputError, match="off a 100 mm wafer"):
        maps.check_on_wafer(dataset, WaferGeometry(100.0, 0.0))
    maps.check_on_wafer(dataset, GEOMETRY)


def test_an_unreachable_scheduler_is_bad_input():
    # port 1 on the loopback: nothing listens there (common practice for a closed port)
    with pytest.raises(LaminaInputError, match="cannot reach the dask scheduler"):
        with maps.dask_client(scheduler="tcp://127.0.0.1:1", connect_timeout="1s"):
            pass
