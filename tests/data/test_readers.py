"""Measurement files: CSV and NetCDF reading, merging, writing, and every bad-data message."""
from __future__ import annotations

import os
import textwrap

import numpy as np
import pytest
import xarray as xr
from scipy import constants

import lamina
from lamina.data.readers import merge_data, parse_table, read_csv_text, read_data, table_to_dataset
from lamina.data.writers import atomic_write, write_data
from lamina.errors import LaminaInputError

ELLIPS = """\
# sample: wafer 7, lot L-0042
# operator: demo
# invented numbers for a test
wavelength_nm,angle_deg,psi_deg,delta_deg,psi_err_deg,delta_err_deg
500,70,20.1,100.5,0.02,0.05
400,70,21.1,-10,0.02,0.05
500,65,22.1,110,0.02,0.05
400,65,23.0,120,0.02,0.05
"""

RT = """\
energy_ev,R,T
2.0,0.3,0.6
3.0,0.31,0.59
"""


def write(tmp_path, text, name="data.csv"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def test_reads_grid_sorted_with_units_and_metadata(tmp_path):
    path = write(tmp_path, ELLIPS)
    ds = read_data(path)
    assert list(ds["angle"].values) == [65.0, 70.0]
    assert list(ds["wavelength"].values) == [400.0, 500.0]
    assert ds["angle"].attrs["units"] == "deg" and ds["wavelength"].attrs["units"] == "nm"
    assert ds["psi"].sel(angle=70, wavelength=500).item() == 20.1
    assert ds["psi_err"].sel(angle=65, wavelength=400).item() == 0.02
    assert ds["psi"].attrs["units"] == "deg"
    assert set(ds.data_vars) == {"psi", "delta", "psi_err", "delta_err"}  # no R, T when not given
    assert ds.attrs["sample"] == "wafer 7, lot L-0042"
    assert ds.attrs["operator"] == "demo"
    assert ds.attrs["comment"] == "invented numbers for a test"
    assert ds.attrs["source_file"] == str(path)
    import hashlib
    assert ds.attrs["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()


def test_delta_is_reported_in_0_360(tmp_path):
    ds = read_data(write(tmp_path, ELLIPS))
    # -10 deg and 350 deg are the same phase; lamina reports [0, 360)
    assert ds["delta"].sel(angle=70, wavelength=400).item() == pytest.approx(350.0)


def test_energy_column_converts_with_codata_hc(tmp_path):
    ds = read_data(write(tmp_path, RT))
    # E = h c / lambda; h, c, e exact in SI since 2019 (CODATA 2018 via scipy.constants)
    hc_ev_nm = constants.h * constants.c / constants.e * 1e9
    np.testing.assert_allclose(ds["wavelength"].values, sorted(hc_ev_nm / np.array([2.0, 3.0])), rtol=1e-9)
    assert list(ds["angle"].values) == [0.0]  # R/T without angle_deg: normal incidence
    assert "abscissa_in_file" in ds.attrs


def test_several_files_merge_on_the_union_grid(tmp_path):
    a, b = write(tmp_path, ELLIPS, "e.csv"), write(tmp_path, RT, "rt.csv")
    ds = read_data([a, b])
    assert list(ds["angle"].values) == [0.0, 65.0, 70.0]
    assert ds["wavelength"].size == 4
    assert np.isnan(ds["psi"].sel(angle=0.0)).all()
    assert np.isnan(ds["R"].sel(angle=70.0)).all()
    assert int(np.isfinite(ds["R"]).sum()) == 2 and int(np.isfinite(ds["psi"]).sum()) == 4
    assert ds.attrs["source_file"] == f"{a}; {b}"


def test_merging_the_same_point_twice_is_an_error(tmp_path):
    a = write(tmp_path, ELLIPS, "a.csv")
    b = write(tmp_path, ELLIPS, "b.csv")
    with pytest.raises(LaminaInputError, match="also in"):
        read_data([a, b])


def test_merge_data_keeps_disjoint_points(tmp_path):
    first = read_data(write(tmp_path, "wavelength_nm,angle_deg,R\n500,0,0.2\n", "1.csv"))
    second = read_data(write(tmp_path, "wavelength_nm,angle_deg,R\n600,0,0.25\n", "2.csv"))
    merged = merge_data([first, second])
    assert merged["R"].values.tolist() == [[0.2, 0.25]]


@pytest.mark.parametrize("suffix", [".csv", ".nc"])
def test_written_files_read_back_identically(tmp_path, suffix):
    ds = read_data(write(tmp_path, ELLIPS))
    out = write_data(ds, tmp_path / f"copy{suffix}", comments=["a note"])
    back = read_data(out)
    for name in ds.data_vars:
        np.testing.assert_allclose(back[name].values, ds[name].values, rtol=1e-11, equal_nan=True)
    assert back.attrs["sample"] == ds.attrs["sample"]
    assert back.attrs["source_file"] == str(out)


def test_netcdf_keeps_gaps_and_csv_refuses_them(tmp_path):
    merged = read_data([write(tmp_path, ELLIPS, "e.csv"), write(tmp_path, RT, "rt.csv")])
    back = read_data(write_data(merged, tmp_path / "merged.nc"))
    np.testing.assert_array_equal(np.isnan(back["R"].values), np.isnan(merged["R"].values))
    with pytest.raises(LaminaInputError, match="gaps"):
        write_data(merged, tmp_path / "merged.csv")
    assert not (tmp_path / "merged.csv").exists()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_atomic_write_keeps_the_old_file_when_writing_fails(tmp_path):
    target = tmp_path / "keep.txt"
    target.write_text("old", encoding="utf-8")
    with pytest.raises(RuntimeError):
        with atomic_write(target) as handle:
            handle.write("new, half-written")
            raise RuntimeError("crash")
    assert target.read_text(encoding="utf-8") == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.txt"]


def test_parse_table_hook_collects_problems_per_row(tmp_path):
    # the wafer-map reader parses the same columns plus its own, and isolates bad rows
    path = write(tmp_path, "site,wavelength_nm,angle_deg,psi_deg\n1,500,70,20\n2,500,70,abc\n3,500,70,21\n")
    table = parse_table(read_csv_text(path), extra_columns=("site",), collect=True)
    assert list(table.problems) == [1]
    assert "abc" in str(table.problems[1]) and ":3: column 4 (psi_deg)" in str(table.problems[1])
    good = table_to_dataset(table, rows=table.extra["site"] == "3")
    assert good["psi"].item() == 21.0


# -- bad files: LaminaInputError naming file, line and column ------------------------------

BAD = {
    "non-numeric": ("wavelength_nm,angle_deg,psi_deg,delta_deg\n500,70,20,100\n600,70,abc,100\n",
                    ":3: column 3 (psi_deg)", "not a number"),
    "empty cell": ("wavelength_nm,angle_deg,psi_deg,delta_deg\n500,70,20,100\n600,70,,100\n",
                   ":3: column 3 (psi_deg)", "empty cell"),
    "nan cell": ("wavelength_nm,angle_deg,R\n500,0,0.2\n600,0,NaN\n", ":3: column 3 (R)", "missing value"),
    "no wavelength": ("angle_deg,psi_deg\n70,20\n", ":1", "wavelength_nm or energy_ev"),
    "no quantity": ("wavelength_nm,angle_deg\n500,70\n", ":1", "at least one of"),
    "unknown column": ("wavelength_nm,angle_deg,psi_deg,colour\n500,70,20,red\n", ":1", "column names among"),
    "duplicate row": ("wavelength_nm,angle_deg,psi_deg\n500,70,20\n600,70,21\n500,70,20.5\n",
                      ":4", "each (wavelength, angle) point once"),
    "R above one": ("wavelength_nm,R\n500,0.2\n600,35.0\n", ":3: column 2 (R)", "not percent"),
    "T below zero": ("wavelength_nm,T\n500,-0.2\n", ":2: column 2 (T)", "between 0 and 1"),
    "psi above 90": ("wavelength_nm,angle_deg,psi_deg\n500,70,95\n", ":2: column 3 (psi_deg)", "0 <= Psi <= 90"),
    "ragged row": ("wavelength_nm,angle_deg,psi_deg\n500,70\n", ":2", "one value per header column"),
    "angle 90": ("wavelength_nm,angle_deg,psi_deg\n500,90,20\n", ":2: column 2 (angle_deg)", "0 <= angle < 90"),
    "zero sigma": ("wavelength_nm,R,R_err\n500,0.2,0\n", ":2: column 3 (R_err)", "positive"),
    "err without quantity": ("wavelength_nm,R,T_err\n500,0.2,0.01\n", ":1", "next to its quantity"),
    "negative wavelength": ("wavelength_nm,R\n-500,0.2\n", ":2: column 1 (wavelength_nm)", "positive"),
    "header only": ("wavelength_nm,R\n", ":1", "at least one data row"),
    "both abscissae": ("wavelength_nm,energy_ev,R\n500,2.48,0.2\n", ":1", "exactly one of"),
    "no header": ("500,70,20,100\n600,70,21,101\n", ":1", "a header row"),
    "column twice": ("wavelength_nm,R,R\n500,0.2,0.2\n", ":1", "each column once"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_data_names_file_line_and_column(tmp_path, case):
    text, where, expected = BAD[case]
    path = write(tmp_path, text)
    with pytest.raises(LaminaInputError) as info:
        read_data(path)
    message = str(info.value)
    assert message.startswith(f"{path}{where}"), message
    assert expected in message, message
    assert path.read_text(encoding="utf-8") == text


def test_the_earliest_problem_in_the_file_is_reported(tmp_path):
    path = write(tmp_path, "wavelength_nm,angle_deg,psi_deg,delta_deg\n500,70,20,x\n600,70,y,100\n")
    with pytest.raises(LaminaInputError, match=r":2: column 4 \(delta_deg\)"):
        read_data(path)


def test_small_negative_reflectance_from_noise_is_accepted(tmp_path):
    # noise around R = 0 (an anti-reflection coating) can dip slightly below zero
    ds = read_data(write(tmp_path, "wavelength_nm,R,R_err\n500,-0.004,0.002\n600,0.003,0.002\n"))
    assert ds["R"].values[0, 0] == -0.004
    with pytest.raises(LaminaInputError):
        read_data(write(tmp_path, "wavelength_nm,R,R_err\n500,-0.05,0.002\n", "worse.csv"))


def test_netcdf_with_wrong_dims_is_an_input_error(tmp_path):
    path = tmp_path / "foreign.nc"
    xr.Dataset({"psi": (("x",), [1.0, 2.0])}).to_netcdf(path, engine="scipy")
    with pytest.raises(LaminaInputError, match="no 'angle' dimension"):
        read_data(path)


def test_garbage_netcdf_is_an_input_error(tmp_path):
    path = tmp_path / "garbage.nc"
    path.write_bytes(b"CDF\x02 this is not really netcdf")
    with pytest.raises(LaminaInputError, match="cannot read as NetCDF"):
        read_data(path)


def test_missing_file(tmp_path):
    with pytest.raises(LaminaInputError, match="not found"):
        read_data(tmp_path / "absent.csv")


def test_top_level_read_data_is_this_one():
    assert lamina.read_data is read_data


def test_utf8_bom_and_blank_lines_are_fine(tmp_path):
    path = tmp_path / "bom.csv"
    path.write_bytes("\ufeff# sample: ä\n\nwavelength_nm,R\n\n500,0.2\n".encode("utf-8"))
    ds = read_data(path)
    assert ds.attrs["sample"] == "ä" and ds["R"].item() == 0.2
    assert os.path.getsize(path) > 0


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_data_exits_2_through_the_command_line(tmp_path, capsys, case):
    from lamina.cli.main import main

    text, where, expected = BAD[case]
    path = write(tmp_path, text)
    code = main(["inspect", str(path)])
    err = capsys.readouterr().err
    assert code == 2
    assert err.startswith(f"lamina: error: {path}{where}") and expected in err, err
    assert err.count("\n") <= 2  # one message (and at most a hint), never a traceback
    assert sorted(p.name for p in tmp_path.iterdir()) == ["data.csv"]
    assert path.read_text(encoding="utf-8") == text


def test_semicolon_files_and_map_files_get_a_pointed_message(tmp_path):
    with pytest.raises(LaminaInputError, match="separated by commas"):
        read_data(write(tmp_path, "wavelength_nm;R\n500;0.2\n", "semi.csv"))
    with pytest.raises(LaminaInputError) as info:
        read_data(write(tmp_path, "site,wavelength_nm,R\n1,500,0.2\n", "map.csv"))
    assert "wafer-map" in info.value.hint


def test_csv_round_trip_property(tmp_path):
    from hypothesis import given, settings
    from hypothesis import strategies as st

    from lamina.data.readers import coordinates, variable_attrs

    grids = st.tuples(
        st.lists(st.floats(0.0, 89.9), min_size=1, max_size=3, unique=True),
        st.lists(st.floats(150.0, 5000.0), min_size=1, max_size=5, unique=True),
    )

    @settings(max_examples=25, deadline=None)
    @given(grids, st.integers(0, 2**32 - 1), st.text(st.characters(blacklist_categories=("Cs", "Cc")), max_size=40))
    def check(grid, seed, note):
        angle, wavelength = np.sort(grid[0]), np.sort(grid[1])
        rng = np.random.default_rng(seed)
        shape = (angle.size, wavelength.size)
        ds = xr.Dataset({"psi": (("angle", "wavelength"), rng.uniform(0, 90, shape), variable_attrs("psi")),
                         "delta": (("angle", "wavelength"), rng.uniform(0, 360, shape), variable_attrs("delta")),
                         "R": (("angle", "wavelength"), rng.uniform(0, 1, shape), variable_attrs("R"))},
                        coords=coordinates(angle, wavelength))
        path = write_data(ds, tmp_path / "prop.csv", metadata={"note": note})
        back = read_data(path)
        # floats are written with their shortest exact text: the values come back bit for bit
        np.testing.assert_array_equal(back["angle"].values, angle)
        np.testing.assert_array_equal(back["wavelength"].values, wavelength)
        for name in ("psi", "delta", "R"):
            np.testing.assert_array_equal(back[name].values, ds[name].values)
        assert back.attrs.get("note", "") == note.strip() or "\n" in note

    check()


def test_csv_floats_do_not_depend_on_numpy_print_options(tmp_path):
    # some libraries switch numpy to legacy printing on import (12 significant digits)
    ds = read_data(write(tmp_path, "wavelength_nm,R\n500.0,0.30000000000000004\n600.0,0.3333333333333333\n"))
    saved = np.get_printoptions()
    try:
        np.set_printoptions(legacy="1.13")
        back = read_data(write_data(ds, tmp_path / "legacy.csv"))
    finally:
        np.set_printoptions(**saved)
    np.testing.assert_array_equal(back["R"].values, ds["R"].values)


@pytest.mark.parametrize("name, value, expected", [
    ("R", 1.5, "R outside [0, 1]"), ("psi", 120.0, "Psi outside [0, 90]"), ("psi_err", -1.0, "not positive"),
])
def test_bad_netcdf_values_name_variable_and_grid_point(tmp_path, name, value, expected):
    from lamina.data.readers import coordinates, variable_attrs

    grid = np.full((2, 3), 0.5)
    ds = xr.Dataset({v: (("angle", "wavelength"), grid.copy(), variable_attrs(v)) for v in ("psi", "psi_err", "R")},
                    coords=coordinates([65.0, 70.0], [400.0, 500.0, 600.0]))
    ds[name].values[1, 2] = value
    path = tmp_path / "bad.nc"
    ds.to_netcdf(path, engine="scipy")
    with pytest.raises(LaminaInputError) as info:
        read_data(path)
    message = str(info.value)
    assert f"{path}: {name} at angle 70 deg, wavelength 600 nm" in message and expected in message, message
