"""`lamina simulate`, `lamina inspect` and `lamina demo` through the command line."""
from __future__ import annotations

import subprocess
import sys
import textwrap

import numpy as np
import pytest
import tmm

import lamina
from lamina.cli.main import main
from lamina.cli.simulate_cmd import parse_grid, parse_noise
from lamina.errors import LaminaInputError

# oxide on silicon with constant indices: n(SiO2) = 1.46 and N(Si) = 3.882 + 0.019i at
# 632.8 nm are handbook-scale values (from memory); the test compares lamina with tmm for
# the same numbers, so their exactness does not matter.
OXIDE = """\
name = "oxide on silicon, constant indices"
[[layers]]
name = "oxide"
thickness_nm = { value = 100.0, min = 0.0, max = 500.0 }
material = { law = "constant", n = 1.46 }
[substrate]
material = { law = "constant", n = 3.882, k = 0.019 }
"""


@pytest.fixture
def model(tmp_path):
    path = tmp_path / "oxide.toml"
    path.write_text(OXIDE, encoding="utf-8")
    return path


def run_cli(argv, capsys):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def tmm_psi_delta(n_list, d_list, angle_deg, wavelength_nm):
    """Psi, Delta (deg) from the tmm package (S. Byrnes, tmm, 2016, arXiv:1603.02720), in our convention.

    tmm's `ellips` returns Delta of -rp/rs with its own sign of rp; for a bare Si
    surface below Brewster's angle tmm gives about 0.77 deg where the convention
    of ellipsometry practice gives 179.23 deg: Delta_ours = (180 - Delta_tmm) mod 360.
    """
    out = tmm.ellips(n_list, d_list, np.radians(angle_deg), wavelength_nm)
    return np.degrees(out["psi"]), np.mod(180.0 - np.degrees(out["Delta"]), 360.0)


# -- round trips -------------------------------------------------------------------------

@pytest.mark.parametrize("suffix", [".csv", ".nc"])
def test_simulate_file_read_back_reproduces_simulate(tmp_path, model, capsys, suffix):
    out = tmp_path / f"sim{suffix}"
    code, stdout, _ = run_cli(["simulate", model, "--wavelengths", "300:1000:50", "--angles", "65,70,75",
                               "-o", out], capsys)
    assert code == 0 and "synthetic" in stdout
    ds = lamina.read_data(out)
    direct = lamina.simulate(lamina.load_model(model), wavelength_nm=np.arange(300.0, 1000.1, 50.0),
                             angle_deg=np.array([65.0, 70.0, 75.0]))
    assert ds["wavelength"].size == 15 and list(ds["angle"].values) == [65.0, 70.0, 75.0]
    for name in ("psi", "delta", "R", "T", "Rs", "Rp", "Ts", "Tp"):
        np.testing.assert_allclose(ds[name].values, direct[name].values, rtol=1e-10, atol=1e-10, err_msg=name)
    assert ds.attrs["data_kind"] == "synthetic"
    assert ds.attrs["param_oxide.thickness_nm"] == "100"


def test_simulated_file_agrees_with_tmm(tmp_path, model, capsys):
    out = tmp_path / "sim.csv"
    assert run_cli(["simulate", model, "--wavelengths", "400,632.8,900", "--angles", "70",
                    "--quantities", "psi,delta", "-o", out], capsys)[0] == 0
    ds = lamina.read_data(out)
    for wl in (400.0, 632.8, 900.0):
        psi, delta = tmm_psi_delta([1.0, 1.46, 3.882 + 0.019j], [np.inf, 100.0, np.inf], 70.0, wl)
        assert ds["psi"].sel(angle=70.0, wavelength=wl).item() == pytest.approx(psi, abs=1e-8)
        assert ds["delta"].sel(angle=70.0, wavelength=wl).item() == pytest.approx(delta, abs=1e-8)


def test_bare_silicon_matches_the_quoted_reference_values(tmp_path, capsys):
    # N = 3.882 + 0.019i at 70 deg: Psi = 10.57, Delta = 179.23 (Fresnel equations, Born and Wolf,
    # Principles of Optics, 7th ed. 1999, sec. 1.5.2; values as quoted in the project conventions)
    path = tmp_path / "si.toml"
    path.write_text('[substrate]\nmaterial = { law = "constant", n = 3.882, k = 0.019 }\n', encoding="utf-8")
    out = tmp_path / "si.csv"
    assert run_cli(["simulate", path, "--wavelengths", "632.8", "--angles", "70", "--quantities", "psi,delta",
                    "-o", out], capsys)[0] == 0
    ds = lamina.read_data(out)
    assert ds["psi"].item() == pytest.approx(10.57, abs=0.005)
    assert ds["delta"].item() == pytest.approx(179.23, abs=0.005)


def test_noise_is_seeded_has_the_asked_sigma_and_writes_err_columns(tmp_path, model, capsys):
    argv = ["simulate", model, "--wavelengths", "300:1000:2", "--angles", "65,70,75", "--quantities", "psi,delta,R",
            "--noise", "psi=0.02,delta=0.05,R=0.002", "--seed", "11", "--quiet"]
    assert run_cli(argv + ["-o", tmp_path / "a.csv"], capsys)[0] == 0
    assert run_cli(argv + ["-o", tmp_path / "b.csv"], capsys)[0] == 0
    assert (tmp_path / "a.csv").read_bytes() == (tmp_path / "b.csv").read_bytes()  # same seed, same file
    noisy = lamina.read_data(tmp_path / "a.csv")
    exact = lamina.simulate(lamina.load_model(model), wavelength_nm=noisy["wavelength"].values,
                            angle_deg=noisy["angle"].values)
    for name, sigma in (("psi", 0.02), ("delta", 0.05), ("R", 0.002)):
        residual = noisy[name].values - exact[name].values
        if name == "delta":
            residual = (residual + 180.0) % 360.0 - 180.0
        # 1053 samples: the sample std is within ~10 % of sigma with overwhelming probability
        assert np.std(residual) == pytest.approx(sigma, rel=0.12), name
        assert abs(np.mean(residual)) < 4 * sigma / np.sqrt(residual.size), name
        np.testing.assert_array_equal(noisy[f"{name}_err"].values, sigma)
    assert "T_err" not in noisy and "T" not in noisy


def test_grid_and_noise_parsing():
    np.testing.assert_array_equal(parse_grid("300:1000:2", "wavelengths", "nm"), np.arange(300, 1001, 2))
    np.testing.assert_array_equal(parse_grid("300:1000:300", "wavelengths", "nm"), [300, 600, 900])
    np.testing.assert_allclose(parse_grid("0.1:0.3:0.1", "x", ""), [0.1, 0.2, 0.3])
    np.testing.assert_array_equal(parse_grid("75,65,70,70", "angles", "deg"), [65, 70, 75])
    assert parse_noise("psi=0.02, delta=0.05") == {"psi": 0.02, "delta": 0.05}
    for bad in ("1:2", "5:1:1", "1:5:0", "a,b", ""):
        with pytest.raises(LaminaInputError):
            parse_grid(bad, "wavelengths", "nm")
    for bad in ("psi", "colour=1", "psi=-1", "psi=x"):
        with pytest.raises(LaminaInputError):
            parse_noise(bad)


# -- errors: exit 2, one message naming the place, no output, input untouched -------------

SIMULATE_ERRORS = {
    "bad wavelengths": (["--wavelengths", "300:abc:2"], "--wavelengths 300:abc:2"),
    "bad angles": (["--angles", "95"], "--angles 95"),
    "bad noise": (["--noise", "psi=big"], "--noise psi=big"),
    "unknown quantity": (["--quantities", "psi,colour"], "--quantities psi,colour"),
    "noise on an unwritten quantity": (["--quantities", "psi", "--noise", "R=0.01"], "--noise R=0.01"),
    "unknown suffix": (["-o", "{tmp}/out.xlsx"], "-o"),
    "folder is a file": (["-o", "{tmp}/oxide.toml/out.csv"], "is a file, not a folder"),
}


@pytest.mark.parametrize("case", sorted(SIMULATE_ERRORS))
def test_simulate_errors_exit_2_and_write_nothing(tmp_path, model, capsys, case):
    extra, where = SIMULATE_ERRORS[case]
    extra = [a.replace("{tmp}", str(tmp_path)) for a in extra]
    before = sorted(p.name for p in tmp_path.iterdir())
    argv = ["simulate", model] + extra
    if "-o" not in extra:
        argv += ["-o", tmp_path / "out.csv"]
    code, _, err = run_cli(argv, capsys)
    assert code == 2
    assert err.startswith("lamina: error: ") and err.count("\n") <= 2, err
    assert where in err, err
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    assert model.read_text(encoding="utf-8") == OXIDE


def test_simulate_bad_model_exits_2_naming_the_key(tmp_path, capsys):
    path = tmp_path / "bad.toml"
    text = OXIDE.replace('n = 1.46', 'n = 1.46, colour = "blue"')
    path.write_text(text, encoding="utf-8")
    code, _, err = run_cli(["simulate", path, "-o", tmp_path / "out.csv"], capsys)
    assert code == 2
    assert f"{path}: layers[1].material.colour" in err
    assert not (tmp_path / "out.csv").exists()
    assert path.read_text(encoding="utf-8") == text


def test_wavelengths_outside_a_material_range_name_the_material(tmp_path, capsys):
    path = tmp_path / "tab.toml"
    path.write_text(textwrap.dedent("""\
        [[layers]]
        name = "film"
        thickness_nm = 50.0
        [layers.material]
        law = "table"
        wavelength_nm = [400.0, 600.0, 800.0]
        n = [2.1, 2.0, 1.95]
        [substrate]
        material = { law = "constant", n = 1.5 }
        """), encoding="utf-8")
    code, _, err = run_cli(["simulate", path, "--wavelengths", "300:1000:10", "-o", tmp_path / "o.csv"], capsys)
    assert code == 2
    assert "film.material" in err and "400-800 nm" in err, err
    assert not (tmp_path / "o.csv").exists()


def test_simulate_refuses_to_overwrite_its_model(tmp_path, model, capsys):
    code, _, err = run_cli(["simulate", model, "-o", model.with_suffix(".csv")], capsys)
    assert code == 0
    csv_copy = model.with_suffix(".csv")
    code, _, err = run_cli(["simulate", csv_copy, "-o", csv_copy], capsys)
    assert code == 2 and "overwrite an input" in err


# -- inspect ------------------------------------------------------------------------------

def test_inspect_model_lists_layers_and_free_parameters(model, capsys):
    code, out, _ = run_cli(["inspect", model], capsys)
    assert code == 0
    assert "oxide" in out and "oxide.thickness_nm" in out and "500" in out
    assert "1 free" in out and "valid" in out


def test_inspect_data_summarises(tmp_path, model, capsys):
    out_file = tmp_path / "sim.csv"
    run_cli(["simulate", model, "--wavelengths", "400:800:100", "--angles", "65,70", "--quantities", "psi,delta",
             "-o", out_file], capsys)
    code, out, _ = run_cli(["inspect", out_file], capsys)
    assert code == 0
    assert "5 from 400 to 800 nm" in out and "65, 70" in out and "20 measured values" in out
    assert "data_kind: synthetic" in out


@pytest.mark.parametrize("text, where", [
    ("wavelength_nm,angle_deg,psi_deg\n500,70,20\n600,70,oops\n", "bad.csv:3: column 3 (psi_deg)"),
    ("wavelength_nm,R\n500,1.7\n", "bad.csv:2: column 2 (R)"),
])
def test_inspect_bad_data_exits_2_naming_line_and_column(tmp_path, capsys, text, where):
    path = tmp_path / "bad.csv"
    path.write_text(text, encoding="utf-8")
    code, _, err = run_cli(["inspect", path], capsys)
    assert code == 2 and where in err, err
    assert path.read_text(encoding="utf-8") == text


def test_inspect_bad_model_in_a_subprocess(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text("[[layers]]\nname = 'a'\nthickness_nm = -5.0\nmaterial = 'air'\n[substrate]\nmaterial = 'air'\n",
                    encoding="utf-8")
    proc = subprocess.run([sys.executable, "-m", "lamina.cli", "inspect", str(path)], capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.startswith("lamina: error: ") and "Traceback" not in proc.stderr
    assert f"{path}: layers[1].thickness_nm" in proc.stderr


# -- demo -----------------------------------------------------------------------------------

def test_demo_runs_every_step_and_writes_into_its_folder(tmp_path, capsys):
    from lamina.cli import demo

    outdir = tmp_path / "tour"
    code, out, err = run_cli(["demo", "-o", outdir, "--quiet"], capsys)
    assert code == 0, err
    for number, step in enumerate(demo.STEPS, start=1):
        assert f"== {number}. {demo.step_title(step)}" in out
    assert "invented" in out and "qualified staff" in out
    simulated = lamina.read_data(outdir / "oxide_simulated.csv")
    assert simulated.attrs["data_kind"] == "synthetic"
    fitted = lamina.load_model(outdir / "oxide_fit" / "fitted.toml")
    # the bundled measurement was made with 102.37 nm (its header says so); the fit finds it
    assert fitted.parameters()["oxide.thickness_nm"].value == pytest.approx(102.37, abs=0.01)
    reports = {p.parent.name for p in outdir.rglob("report.html")}
    assert {"oxide_fit", "nitride_fit", "map", "check"} <= reports, reports


def test_demo_quick_leaves_out_the_slow_steps(tmp_path, capsys):
    from lamina.cli import demo

    slow = [s for s in demo.STEPS if getattr(s, "slow", False)]
    assert slow, "the map and Monte Carlo steps are marked slow"
    code, out, _ = run_cli(["demo", "-o", tmp_path / "quick", "--quick", "--quiet"], capsys)
    assert code == 0
    assert all(demo.step_title(s) not in out for s in slow)
    assert not (tmp_path / "quick" / "map").exists()


def test_demo_refuses_a_file_as_its_folder(tmp_path, capsys):
    target = tmp_path / "file.txt"
    target.write_text("keep", encoding="utf-8")
    code, _, err = run_cli(["demo", "-o", target], capsys)
    assert code == 2 and "not a folder" in err
    assert target.read_text(encoding="utf-8") == "keep"


def test_inspect_recognises_a_wafer_map_and_lists_unreadable_sites(tmp_path, capsys):
    rows = ["site,x_mm,y_mm,wavelength_nm,angle_deg,psi_deg,delta_deg"]
    for site, (x, y) in enumerate([(0.0, 0.0), (30.0, 0.0), (0.0, -30.0)], start=1):
        for wl in (400, 500, 600):
            psi = "oops" if (site == 3 and wl == 500) else "20.0"
            rows.append(f"{site},{x},{y},{wl},70,{psi},100")
    path = tmp_path / "map.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    code, out, _ = run_cli(["inspect", path], capsys)
    assert code == 0
    assert "sites: 3" in out and "unreadable sites: 1" in out and "map.csv:9: column 6 (psi_deg)" in out


def test_simulate_applies_the_model_instrument_section(tmp_path, capsys):
    path = tmp_path / "inst.toml"
    path.write_text(OXIDE + "[instrument]\nbandwidth_nm = 4.0\nangle_spread_deg = 0.5\n", encoding="utf-8")
    out = tmp_path / "inst.csv"
    assert run_cli(["simulate", path, "--wavelengths", "400:800:50", "--angles", "70", "-o", out], capsys)[0] == 0
    stack = lamina.load_model(path)
    wl, angle = np.arange(400.0, 800.1, 50.0), np.array([70.0])
    averaged = lamina.simulate(stack, wavelength_nm=wl, angle_deg=angle,
                               instrument=lamina.Instrument(bandwidth_nm=4.0, angle_spread_deg=0.5))
    plain = lamina.simulate(stack, wavelength_nm=wl, angle_deg=angle)
    written = lamina.read_data(out)
    np.testing.assert_allclose(written["psi"].values, averaged["psi"].values, rtol=1e-10)
    assert np.max(np.abs(written["psi"].values - plain["psi"].values)) > 1e-4  # averaging did something
    assert "bandwidth_nm=4" in written.attrs["instrument"]


def test_simulate_creates_the_output_folder_only_on_success(tmp_path, model, capsys):
    assert run_cli(["simulate", model, "--wavelengths", "bad", "-o", tmp_path / "new" / "out.csv"], capsys)[0] == 2
    assert not (tmp_path / "new").exists()
    assert run_cli(["simulate", model, "--wavelengths", "400,500", "-o", tmp_path / "new" / "sub" / "out.csv"],
                   capsys)[0] == 0
    assert lamina.read_data(tmp_path / "new" / "sub" / "out.csv")["wavelength"].size == 2
