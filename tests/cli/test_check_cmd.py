"""`lamina check`: outputs, exit codes, bad input, untouched inputs."""
import hashlib
import json
import shutil
from pathlib import Path

import pytest

from lamina.cli.main import main

SAMPLES = Path(__file__).resolve().parents[2] / "src" / "lamina" / "sample_data" / "coatings"


@pytest.fixture()
def files(tmp_path):
    for name in ("ar4_recipe.toml", "ar4_target.toml", "ar4_tolerances.toml", "ar4_part_0412.csv"):
        shutil.copy(SAMPLES / name, tmp_path / name)
    return tmp_path


def _digests(folder):
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir() if p.is_file()}


def test_full_check_on_sample_part(files, capsys):
    before = _digests(files)
    out = files / "out"
    code = main(["check", str(files / "ar4_recipe.toml"), "--target", str(files / "ar4_target.toml"),
                 "--tolerances", str(files / "ar4_tolerances.toml"), "--measured", str(files / "ar4_part_0412.csv"),
                 "--trials", "400", "--seed", "2", "-o", str(out)])
    assert code == 1  # the sample part has H2 5 % thick: it fails the photopic band
    report = json.loads((out / "check.json").read_text())
    assert report["pass"] is False
    assert report["design"]["pass"] is True
    assert [b["name"] for b in report["design"]["bands"]] == ["visible anti-reflection", "photopic core",
                                                              "oblique 30 deg"]
    for band in report["design"]["bands"]:
        assert band["worst_margin"] > 0 and 430 <= band["at_nm"] <= 670
    assert report["design"]["color"]["delta_e"] < 4.0
    assert set(report["yield"]) >= {"trials", "pass_fraction", "ci95", "worst_layer"}
    assert report["yield"]["trials"] == 400
    measured = report["measured"]
    assert measured["pass"] is False
    assert next(iter(measured["drift"])) == "H2.thickness_nm"
    assert measured["drift"]["H2.thickness_nm"]["delta_pct"] == pytest.approx(5.0, abs=0.5)
    assert set(report["sensitivity"]["ranking"]) == {"L2", "H2", "L1", "H1"}
    pngs = sorted(p.name for p in out.glob("*.png"))
    assert "check_R_unpolarized_0deg.png" in pngs and "check_sensitivity.png" in pngs
    assert not [p for p in out.iterdir() if p.name.startswith(".")]  # no temporary files left
    assert _digests(files) == before  # inputs untouched
    assert "overall: FAIL" in capsys.readouterr().out


def test_design_only_passes(files, capsys):
    out = files / "out"
    code = main(["check", str(files / "ar4_recipe.toml"), "--target", str(files / "ar4_target.toml"), "--quiet",
                 "-o", str(out)])
    assert code == 0
    report = json.loads((out / "check.json").read_text())
    assert report["pass"] is True and "yield" not in report and "measured" not in report
    assert capsys.readouterr().out == ""


def test_failing_yield_is_judged(files):
    target = files / "ar4_target.toml"
    target.write_text(target.read_text().replace("min_yield = 0.9", "min_yield = 0.9999"))
    loose = files / "loose.toml"
    loose.write_text("[tolerances.default]\nthickness_pct = 3.0\n")
    code = main(["check", str(files / "ar4_recipe.toml"), "--target", str(target), "--tolerances", str(loose),
                 "--trials", "200", "--quiet", "-o", str(files / "out")])
    assert code == 1
    report = json.loads((files / "out" / "check.json").read_text())
    assert report["design"]["pass"] is True and report["yield"]["pass"] is False


@pytest.mark.parametrize("edit, words", [
    (("max = 0.005", "max = 0.005\nmin = 0.01"), "bands.1.min"),
    (('quantity = "R"', 'quantity = "Rx"'), "bands.1.quantity"),
    (("max_delta_e = 4.0", "max_dE = 4.0"), "color.max_dE"),
])
def test_bad_target_exits_2_naming_file_and_key(files, capsys, edit, words):
    target = files / "ar4_target.toml"
    target.write_text(target.read_text().replace(*edit, 1))
    code = main(["check", str(files / "ar4_recipe.toml"), "--target", str(target), "-o", str(files / "out")])
    err = capsys.readouterr().err
    assert code == 2
    assert "ar4_target.toml" in err and words in err and "Traceback" not in err
    assert len(err.strip().splitlines()) <= 2
    assert not (files / "out" / "check.json").exists()


def test_unknown_tolerance_layer_and_double_tolerances(files, capsys):
    bad = files / "bad_tol.toml"
    bad.write_text("[tolerances.layers.H9]\nthickness_nm = 1.0\n")
    args = ["check", str(files / "ar4_recipe.toml"), "--target", str(files / "ar4_target.toml"), "-o",
            str(files / "out")]
    assert main(args + ["--tolerances", str(bad)]) == 2
    assert "tolerances.layers.H9" in capsys.readouterr().err
    target = files / "ar4_target.toml"
    target.write_text(target.read_text() + "\n" + (files / "ar4_tolerances.toml").read_text())
    assert main(args + ["--tolerances", str(files / "ar4_tolerances.toml")]) == 2
    assert "given twice" in capsys.readouterr().err


def test_measured_file_covering_no_band(files, capsys):
    other = files / "far.csv"
    other.write_text("wavelength_nm,angle_deg,R\n900,0,0.05\n910,0,0.05\n920,0,0.05\n")
    code = main(["check", str(files / "ar4_recipe.toml"), "--target", str(files / "ar4_target.toml"),
                 "--measured", str(other), "-o", str(files / "out")])
    assert code == 2
    assert "none of the target's bands" in capsys.readouterr().err


def test_missing_recipe(files, capsys):
    code = main(["check", str(files / "nope.toml"), "--target", str(files / "ar4_target.toml"),
                 "-o", str(files / "out")])
    assert code == 2
    assert "nope.toml" in capsys.readouterr().err
