"""The shipped sample coating files are what tools/make_sample_coatings.py makes today."""
import importlib.util
from pathlib import Path

import numpy as np

from lamina.qa.recipes import load_target, load_tolerances

ROOT = Path(__file__).resolve().parents[2]
COATINGS = ROOT / "src" / "lamina" / "sample_data" / "coatings"


def _generator():
    spec = importlib.util.spec_from_file_location("make_sample_coatings", ROOT / "tools" / "make_sample_coatings.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _numbers_and_text(path: Path):
    """Comment/header text and the numeric table of a CSV, so that the check is
    immune to last-digit round-off of a different BLAS or numpy build."""
    lines = path.read_text().splitlines()
    text = [ln for ln in lines if not ln[:1].isdigit() and not ln[:1] == "-"]
    rows = [[float(v) for v in ln.split(",")] for ln in lines if ln[:1].isdigit() or ln[:1] == "-"]
    return text, np.array(rows)


def test_generator_reproduces_the_files(tmp_path):
    generator = _generator()
    generator.generate(tmp_path)
    for path in sorted(tmp_path.iterdir()):
        shipped = COATINGS / path.name
        if path.suffix == ".csv":
            text, numbers = _numbers_and_text(path)
            shipped_text, shipped_numbers = _numbers_and_text(shipped)
            assert text == shipped_text, path.name
            np.testing.assert_allclose(numbers, shipped_numbers, rtol=1e-9, atol=1e-12, err_msg=path.name)
        else:
            assert path.read_bytes() == shipped.read_bytes(), path.name


def test_sample_files_are_valid_and_say_they_are_invented():
    target = load_target(COATINGS / "ar4_target.toml")
    assert len(target.bands) == 3 and target.min_yield == 0.9
    load_tolerances(COATINGS / "ar4_tolerances.toml").check_layers(["L2", "H2", "L1", "H1"])
    for path in COATINGS.iterdir():
        assert "INVENTED DEMO DATA" in path.read_text(), path.name
