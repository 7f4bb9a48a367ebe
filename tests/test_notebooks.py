"""The example notebooks run from top to bottom on the bundled sample data (so they never rot).

Each is executed with nbclient in a fresh python3 kernel inside a temporary working
folder (the notebooks write their outputs there).  The notebooks are committed
without outputs.
"""
from __future__ import annotations

import os
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

NOTEBOOK_DIR = Path(__file__).resolve().parents[1] / "notebooks"
NOTEBOOKS = sorted(NOTEBOOK_DIR.glob("*.ipynb"))
CELL_TIMEOUT_S = 120


def test_there_are_at_least_three_notebooks():
    names = [p.name for p in NOTEBOOKS]
    assert len(names) >= 3
    for topic in ("oxide", "wafer_map", "coating"):
        assert any(topic in name for name in names), topic


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_notebook_is_committed_clean_and_says_what_its_data_is(path):
    nb = nbformat.read(path, as_version=4)
    nbformat.validate(nb)
    for cell in nb.cells:
        if cell.cell_type == "code":
            assert cell.outputs == [] and cell.execution_count is None, "commit notebooks without outputs"
    text = "\n".join(cell.source for cell in nb.cells if cell.cell_type == "markdown")
    assert "invented for demonstration" in text
    assert "traceable reference samples" in text and "qualified staff" in text


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_notebook_runs(path, tmp_path):
    nb = nbformat.read(path, as_version=4)
    env_backup = os.environ.get("MPLBACKEND")
    os.environ["MPLBACKEND"] = "module://matplotlib_inline.backend_inline"  # the kernel's own default
    try:
        client = nbclient.NotebookClient(nb, timeout=CELL_TIMEOUT_S, kernel_name="python3",
                                         resources={"metadata": {"path": str(tmp_path)}})
        client.execute()
    finally:
        if env_backup is None:
            os.environ.pop("MPLBACKEND", None)
        else:
            os.environ["MPLBACKEND"] = env_backup
    errors = [out for cell in nb.cells if cell.cell_type == "code" for out in cell.outputs
              if out.get("output_type") == "error"]
    assert not errors
    # every notebook ends with a written report of the command it ran
    assert any((tmp_path / folder / "report.html").is_file() for folder in ("fit-out", "map-out", "check-out"))


def test_notebooks_match_their_generator():
    """notebooks/make_notebooks.py is the source; the .ipynb files are its output."""
    import importlib.util
    spec = importlib.util.spec_from_file_location("make_notebooks", NOTEBOOK_DIR / "make_notebooks.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    for name, expected in module.NOTEBOOKS.items():
        committed = nbformat.read(NOTEBOOK_DIR / name, as_version=4)
        assert [c.source for c in committed.cells] == [c.source for c in expected.cells], \
            f"{name} is stale: run python notebooks/make_notebooks.py"
