"""report.html opened in a real headless browser (Debian's chromium).

Checks that the page renders offline, that the verdict and the parameter table
are in the browser's DOM, and that the screenshot is not blank.  Skipped only
when chromium is not installed (.ci/run installs it).
"""
from __future__ import annotations

import json
import shutil
import subprocess

import pytest

from lamina.report.html import write_report

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (apt-get install chromium)")
BROWSER_TIMEOUT_S = 90


def _chromium(tmp_path, *mode):
    profile = tmp_path / "chromium-profile"
    args = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
            "--disable-background-networking", "--disable-component-update", "--disable-sync",
            f"--user-data-dir={profile}", "--window-size=1200,1600", *mode]
    return subprocess.run(args, capture_output=True, text=True, timeout=BROWSER_TIMEOUT_S)


@pytest.fixture(scope="module")
def rendered(tmp_path_factory, samples):
    """A folder with a fit and a recipe check, its report, the DOM and a screenshot."""
    tmp_path = tmp_path_factory.mktemp("browser")
    out = tmp_path / "out"
    out.mkdir()
    (out / "result.json").write_text(json.dumps(samples.fit_result(name=f"{samples.HOSTILE}.csv")))
    (out / "check.json").write_text(json.dumps(samples.check_json()))
    samples.write_plot(out / "fit_psi_delta.png", "Psi and Delta")
    report = write_report(out)
    url = report.resolve().as_uri()
    dom = _chromium(tmp_path, "--dump-dom", url)
    shot = tmp_path / "shot.png"
    _chromium(tmp_path, f"--screenshot={shot}", url)
    return dom, shot


def test_browser_dom_holds_verdict_and_parameter_table(rendered):
    dom, _ = rendered
    assert dom.returncode == 0, dom.stderr[-2000:]
    html = dom.stdout
    assert 'id="verdict"' in html and "Fit converged with 2 warnings" in html
    assert "Recipe check fails" in html
    assert '<table class="params">' in html and "oxide.thickness_nm" in html and "101.235 ± 0.012" in html
    # the hostile file name stayed text in the live DOM: no script element was created
    assert "<script" not in html.lower() and "&lt;script&gt;" in html


def test_browser_screenshot_is_not_blank(rendered):
    import numpy as np
    from PIL import Image
    _, shot = rendered
    assert shot.is_file(), "chromium wrote no screenshot"
    image = Image.open(shot).convert("RGB")
    assert image.size == (1200, 1600)
    pixels = np.asarray(image).reshape(-1, 3).astype(int)
    non_white = np.count_nonzero(pixels.min(axis=1) < 235)
    colours = np.unique(pixels, axis=0)
    # rendered text, tables and coloured verdict panels: many colours, a real share of inked pixels
    assert len(colours) > 50
    assert non_white > 0.05 * len(pixels)
    # the failing verdict panel's tint (CSS --fail-bg #fbe6e4) is on screen
    assert np.any(np.all(np.abs(pixels - [0xFB, 0xE6, 0xE4]) <= 3, axis=1))
