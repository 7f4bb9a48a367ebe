"""`lamina report OUTDIR` on the command line."""
from __future__ import annotations

import subprocess
import sys

from lamina.cli.main import main


def test_report_command_rebuilds_the_report(check_dir, capsys):
    assert main(["report", str(check_dir)]) == 0
    assert (check_dir / "report.html").is_file()
    assert "report.html" in capsys.readouterr().out
    (check_dir / "report.html").unlink()
    assert main(["report", str(check_dir), "--quiet"]) == 0
    assert capsys.readouterr().out == ""
    assert "Recipe check fails" in (check_dir / "report.html").read_text(encoding="utf-8")


def test_empty_folder_exits_2_with_one_clear_line(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "lamina.cli", "report", str(tmp_path)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    first = proc.stderr.splitlines()[0]
    assert first.startswith("lamina: error: ") and str(tmp_path) in first
    assert "result.json, summary.json, check.json" in first
    assert not (tmp_path / "report.html").exists()


def test_missing_folder_exits_2(tmp_path, capsys):
    assert main(["report", str(tmp_path / "nowhere")]) == 2
    assert "no such folder" in capsys.readouterr().err


def test_broken_json_exits_2_naming_the_place(tmp_path, capsys):
    (tmp_path / "summary.json").write_text('{"pass": tru}')
    assert main(["report", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "summary.json:1:" in err and "invalid JSON" in err
    assert not (tmp_path / "report.html").exists()


def test_a_file_instead_of_a_folder_exits_2(tmp_path, capsys):
    (tmp_path / "result.json").write_text("{}")
    assert main(["report", str(tmp_path / "result.json")]) == 2
    assert "is a file, not a folder" in capsys.readouterr().err
