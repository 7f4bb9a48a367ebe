"""`lamina fit` and `lamina invert` end to end: files from `lamina simulate`, outputs, exit codes."""
import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

import lamina
from lamina.cli.main import main

TRUTH_MODEL = """
name = "oxide on silicon, truth"
[[layers]]
name = "oxide"
thickness_nm = 104.0
material = "SiO2"
[substrate]
material = "Si"
"""

START_MODEL = """
name = "oxide on silicon"
[[layers]]
name = "oxide"
thickness_nm = { value = 95.0, min = 0.0, max = 500.0 }
material = "SiO2"
[substrate]
material = "Si"
"""

RESULT_KEYS = {"converged", "message", "statistics", "parameters", "correlations", "warnings", "provenance"}
PARAMETER_KEYS = {"value", "stderr", "ci90", "min", "max", "vary", "at_bound", "unit"}


def simulate(tmp_path, model_text, name, extra=("--angles", "65,70,75"), thickness=None):
    model = tmp_path / f"{name}.toml"
    model.write_text(model_text if thickness is None else model_text.replace("104.0", str(thickness)))
    out = tmp_path / f"{name}.csv"
    rc = main(["simulate", str(model), "--wavelengths", "400:800:20", *extra, "--noise", "psi=0.02,delta=0.05",
               "--seed", "3", "--quiet", "-o", str(out)])
    assert rc == 0
    return out


@pytest.fixture()
def measured(tmp_path):
    return simulate(tmp_path, TRUTH_MODEL, "measured")


def write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_fit_writes_every_output(tmp_path, measured, capsys):
    model = write(tmp_path, "start.toml", START_MODEL)
    before = measured.read_bytes()
    out = tmp_path / "out" / "nested"
    rc = main(["fit", str(measured), "--model", str(model), "-o", str(out)])
    assert rc == 0
    result = json.loads((out / "result.json").read_text())
    assert set(result) == RESULT_KEYS
    assert result["converged"] is True
    assert set(result["statistics"]) == {"chi2", "reduced_chi2", "n_points", "n_free", "rms"}
    assert set(result["statistics"]["rms"]) <= {"psi", "delta", "R", "T"} and "psi" in result["statistics"]["rms"]
    entry = result["parameters"]["oxide.thickness_nm"]
    assert set(entry) == PARAMETER_KEYS
    assert entry["unit"] == "nm"
    assert abs(entry["value"] - 104.0) < max(3 * entry["stderr"], 0.05)
    assert set(result["provenance"]) == {"lamina", "data_sha256", "model", "created"}
    assert list(result["provenance"]["data_sha256"].values())[0]
    # fitted.toml loads again and carries the fitted value
    fitted = lamina.load_model(out / "fitted.toml")
    assert fitted.layer("oxide").thickness_nm.value == pytest.approx(entry["value"])
    table = pd.read_csv(out / "fit.csv")
    assert list(table.columns) == ["sample", "angle_deg", "wavelength_nm", "quantity", "data", "model", "residual",
                                   "sigma"]
    assert len(table) == result["statistics"]["n_points"]
    assert any(p.name.startswith("spectra_") for p in out.glob("*.png"))
    printed = capsys.readouterr().out
    assert "oxide.thickness_nm" in printed and "+-1 sigma" in printed
    assert measured.read_bytes() == before          # the input is never changed
    assert not list(out.glob(".*tmp*"))            # no temporary files left behind


def test_quiet_prints_nothing(tmp_path, measured, capsys):
    model = write(tmp_path, "start.toml", START_MODEL)
    assert main(["fit", str(measured), "--model", str(model), "--quiet", "-o", str(tmp_path / "q")]) == 0
    assert capsys.readouterr().out == ""


def test_global_search_from_the_command_line(tmp_path):
    data = simulate(tmp_path, TRUTH_MODEL, "thick", thickness=1210.0)
    model = write(tmp_path, "far.toml", START_MODEL.replace("value = 95.0, min = 0.0, max = 500.0",
                                                            "value = 1000.0, min = 0.0, max = 2000.0"))
    rc = main(["fit", str(data), "--model", str(model), "--global", "--quiet", "-o", str(tmp_path / "g")])
    assert rc == 0
    value = json.loads((tmp_path / "g" / "result.json").read_text())["parameters"]["oxide.thickness_nm"]["value"]
    assert value == pytest.approx(1210.0, abs=0.5)


def test_multi_sample_model_file(tmp_path):
    for name, t in (("w1", 60.0), ("w2", 140.0)):
        simulate(tmp_path, TRUTH_MODEL, name, thickness=t)
    model = write(tmp_path, "multi.toml", START_MODEL + """
[[samples]]
name = "w1"
data = "w1.csv"
overrides = { "oxide.thickness_nm" = { value = 55.0, min = 0.0, max = 500.0 } }

[[samples]]
name = "w2"
data = "w2.csv"
overrides = { "oxide.thickness_nm" = { value = 150.0, min = 0.0, max = 500.0 } }
""")
    out = tmp_path / "multi_out"
    assert main(["fit", "--model", str(model), "--quiet", "-o", str(out)]) == 0
    result = json.loads((out / "result.json").read_text())
    assert result["parameters"]["w1.oxide.thickness_nm"]["value"] == pytest.approx(60.0, abs=0.1)
    assert result["parameters"]["w2.oxide.thickness_nm"]["value"] == pytest.approx(140.0, abs=0.1)
    assert set(pd.read_csv(out / "fit.csv")["sample"]) == {"w1", "w2"}
    # fitted.toml keeps the samples, with data paths that still find the files from OUTDIR
    fitted = lamina.load_model(out / "fitted.toml")
    assert [s["name"] for s in fitted.extras["samples"]] == ["w1", "w2"]
    assert (out / fitted.extras["samples"][0]["data"]).resolve() == (tmp_path / "w1.csv").resolve()
    # the same files given on the command line, in sample order
    assert main(["fit", str(tmp_path / "w1.csv"), str(tmp_path / "w2.csv"), "--model", str(model), "--quiet",
                 "-o", str(tmp_path / "multi_cli")]) == 0


def test_impossible_model_exits_3_and_still_writes(tmp_path, measured, capsys):
    # a film whose index and thickness bounds cannot reach the data
    model = write(tmp_path, "wrong.toml", START_MODEL.replace('material = "SiO2"',
                                                              'material = { law = "constant", n = 2.6, k = 0.4 }')
                  .replace("max = 500.0", "max = 20.0").replace("95.0", "10.0"))
    rc = main(["fit", str(measured), "--model", str(model), "-o", str(tmp_path / "bad")])
    assert rc == 3
    result = json.loads((tmp_path / "bad" / "result.json").read_text())
    assert result["converged"] is False
    assert "no acceptable fit" in result["message"]
    assert "NOT converged" in capsys.readouterr().out


@pytest.mark.parametrize("model_text, message", [
    (START_MODEL.replace("{ value = 95.0, min = 0.0, max = 500.0 }", "95.0"), "no free parameters"),
    (START_MODEL + '\n[[layers]]\nname = "cap"\nmaterial = "SiO2"\nthickness_nm = { value = 1.0, expr = "oxide.thick / 2" }\n',
     "unknown parameter 'oxide.thick'"),
    (START_MODEL.replace('material = "SiO2"', 'material = { law = "table", wavelength_nm = [500.0, 700.0], '
                                              'n = [1.5, 1.5] }'), "500-700"),
    (START_MODEL + '\n[[samples]]\nname = "w1"\n', "names no data file"),
])
def test_bad_input_exits_2_with_one_line(tmp_path, measured, capsys, model_text, message):
    model = write(tmp_path, "bad.toml", model_text)
    rc = main(["fit", str(measured), "--model", str(model), "-o", str(tmp_path / "o")] if "samples" not in model_text
              else ["fit", "--model", str(model), "-o", str(tmp_path / "o")])
    assert rc == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err
    assert not (tmp_path / "o" / "result.json").exists()


def test_missing_data_file_exits_2_in_a_subprocess(tmp_path):
    model = write(tmp_path, "start.toml", START_MODEL)
    proc = subprocess.run([sys.executable, "-m", "lamina.cli", "fit", str(tmp_path / "nope.csv"), "--model",
                           str(model), "-o", str(tmp_path / "o")], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert "nope.csv" in proc.stderr and "Traceback" not in proc.stderr


def test_invert_writes_a_table_the_table_law_reads(tmp_path, measured):
    model = write(tmp_path, "fixed.toml", TRUTH_MODEL)
    out = tmp_path / "inv"
    rc = main(["invert", str(measured), "--model", str(model), "--layer", "oxide", "--quiet", "-o", str(out)])
    assert rc == 0
    table = pd.read_csv(out / "nk.csv", comment="#")
    assert list(table.columns) == ["wavelength_nm", "n", "k", "n_err", "k_err"]
    # the inverted n of the oxide agrees with the model's own SiO2 (Malitson 1965) within a few sigma
    sio2 = lamina.materials.get("SiO2").nk(table["wavelength_nm"].to_numpy()).real
    assert np.all(np.abs(table["n"] - sio2) < 5 * table["n_err"] + 1e-3)
    report = json.loads((out / "invert.json").read_text())
    assert report["layer"] == "oxide" and "kramers_kronig" in report
    assert (out / "nk.png").exists()
    # the table reads back through the model file's table law
    reread = write(tmp_path, "from_table.toml", TRUTH_MODEL.replace('material = "SiO2"',
                                                                   'material = { law = "table", file = "inv/nk.csv" }'))
    stack = lamina.load_model(reread)
    assert np.allclose(stack.layer("oxide").material.nk(table["wavelength_nm"].to_numpy()).real, table["n"])


def test_invert_unknown_layer_exits_2(tmp_path, measured, capsys):
    model = write(tmp_path, "fixed.toml", TRUTH_MODEL)
    assert main(["invert", str(measured), "--model", str(model), "--layer", "nitride", "-o", str(tmp_path / "i")]) == 2
    assert "nitride" in capsys.readouterr().err


def test_output_folder_that_is_a_file_exits_2(tmp_path, measured, capsys):
    model = write(tmp_path, "start.toml", START_MODEL)
    blocker = write(tmp_path, "taken", "not a folder")
    assert main(["fit", str(measured), "--model", str(model), "-o", str(blocker)]) == 2
    assert "not a folder" in capsys.readouterr().err
    assert blocker.read_text() == "not a folder"
