"""`lamina inspect --quiet`: validation for scripts, exit code only."""
from __future__ import annotations

from pathlib import Path

from lamina.cli.main import main

SAMPLES = Path(__file__).resolve().parents[2] / "sample_data"


def test_quiet_prints_nothing_for_good_files(capsys):
    code = main(["inspect", "--quiet", str(SAMPLES / "oxide_on_si.toml"), str(SAMPLES / "oxide_on_si_ellips.csv")])
    out = capsys.readouterr()
    assert code == 0
    assert out.out == ""


def test_quiet_still_reports_a_bad_file_with_exit_2(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text('[[layers]]\nname = "ox"\nthickness_nm = -1.0\nmaterial = "SiO2"\n[substrate]\nmaterial = "Si"\n')
    code = main(["inspect", "--quiet", str(bad)])
    err = capsys.readouterr().err
    assert code == 2
    assert "bad.toml" in err and "thickness_nm" in err
