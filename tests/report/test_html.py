"""report.html built from fit / map / check output folders (fixtures in conftest.py)."""
from __future__ import annotations

import base64
import hashlib
import json
import re
from html.parser import HTMLParser

import pytest

from lamina.errors import LaminaInputError
from lamina.report.html import CAUTION, fmt_pm, render_report, write_report



class _Collector(HTMLParser):
    """Tags, attributes and text of a page, via the standard library's HTML parser."""

    def __init__(self):
        super().__init__()
        self.tags, self.attrs, self.text, self.open = [], [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs += [(tag, k, v or "") for k, v in attrs]

    def handle_data(self, data):
        self.text.append(data)


def parse(html: str) -> _Collector:
    collector = _Collector()
    collector.feed(html)
    collector.close()
    return collector


def test_fit_report_verdict_first_then_parameters(fit_dir, samples):
    path = write_report(fit_dir)
    assert path == fit_dir / "report.html"
    html = path.read_text(encoding="utf-8")
    # the verdict comes before the parameter table
    assert html.index('id="verdict"') < html.index("Parameters") < html.index('id="plots"')
    assert "Fit converged with 2 warnings" in html
    assert "reduced chi-square 1.034" in html
    assert "native.thickness_nm ended at its bound 0" in html
    # value +- 1 sigma with sigma to two significant digits, then the 90 % interval (values of conftest.fit_result)
    assert "101.235 ± 0.012" in html
    assert "101.214 .. 101.255" in html
    assert "1.45321 ± 0.00052" in html
    # fit statistics with units, correlation flagged above |r| = 0.95
    assert "0.0512 deg" in html
    assert 'class="l4 strong">-0.96<' in html
    # model text and provenance
    assert "thickness_nm = { value = 101.23456" in html
    assert "w07_center.csv" in html and "3f" * 32 in html
    assert CAUTION in html


def test_not_converged_fit_is_a_failing_verdict(tmp_path, samples):
    (tmp_path / "result.json").write_text(json.dumps(samples.fit_result(converged=False)))
    html = render_report(tmp_path)
    assert '<div class="verdict fail" data-kind="fit">' in html
    assert "Fit did not converge" in html
    assert "maximum number of function evaluations" in html


@pytest.mark.parametrize("reduced, words", [(7.9, "well above 1"), (0.05, "well below 1"), (1.2, "close to 1")])
def test_reduced_chi_square_is_read_for_the_user(tmp_path, reduced, words, samples):
    result = samples.fit_result()
    result["statistics"]["reduced_chi2"] = reduced
    (tmp_path / "result.json").write_text(json.dumps(result))
    assert words in render_report(tmp_path)


def test_plots_are_embedded_byte_for_byte(fit_dir):
    html = write_report(fit_dir).read_text(encoding="utf-8")
    uris = [v for tag, k, v in parse(html).attrs if tag == "img" and k == "src"]
    assert len(uris) == 1 and uris[0].startswith("data:image/png;base64,")
    assert base64.b64decode(uris[0].split(",", 1)[1]) == (fit_dir / "fit_psi_delta.png").read_bytes()


def test_no_plots_is_not_an_error(tmp_path):
    (tmp_path / "result.json").write_text(json.dumps({"converged": True}))
    html = render_report(tmp_path)
    assert "No plots were found" in html
    assert "<img" not in html


def test_report_is_self_contained(fit_dir, map_dir, check_dir):
    for folder in (fit_dir, map_dir, check_dir):
        page = parse(render_report(folder))
        # every resource is inline: no stylesheet links, scripts, frames or remote fonts
        assert not {"link", "script", "iframe", "object", "embed"} & set(page.tags)
        for tag, key, value in page.attrs:
            if key in ("src", "href", "srcset", "action"):
                assert value.startswith("data:") or value.startswith("#"), (tag, key, value[:60])
        style = "".join(page.text)
        assert "@import" not in style and "url(" not in style and "@font-face" not in style


def test_every_user_string_is_escaped(tmp_path, samples):
    """A hostile name in every user-supplied field must arrive as text, never as markup."""
    result = samples.fit_result(name=f"{samples.HOSTILE}.csv")
    result["message"] = samples.HOSTILE
    result["warnings"].append(samples.HOSTILE)
    result["parameters"][f"{samples.HOSTILE}.thickness_nm"] = {"value": 1.0, "stderr": 0.1, "unit": samples.HOSTILE}
    result["provenance"]["sample"] = samples.HOSTILE
    result["provenance"]["model"] = samples.HOSTILE
    (tmp_path / "result.json").write_text(json.dumps(result))
    (tmp_path / "fitted.toml").write_text(f'name = "{samples.HOSTILE}"\n')
    (tmp_path / f"{samples.HOSTILE.replace('/', '_')}.svg").write_text(
        '<svg xmlns="http://www.w3.org/2000/svg" width="10" height="10"><script>alert(1)</script></svg>')
    summary = samples.map_summary()
    summary["wafers"][samples.HOSTILE] = {"pass": False, "reasons": [samples.HOSTILE], "parameters": {samples.HOSTILE: {"mean": 1.0}}}
    sites = samples.map_sites()
    sites[0]["reason"] = samples.HOSTILE
    sites[0]["status"] = samples.HOSTILE
    samples.write_map_dir(tmp_path, summary, sites)
    check = samples.check_json()
    check["design"]["bands"][0]["name"] = samples.HOSTILE
    check["yield"]["worst_layer"] = samples.HOSTILE
    check["extra_key"] = {samples.HOSTILE: [samples.HOSTILE]}
    (tmp_path / "check.json").write_text(json.dumps(check))

    html = write_report(tmp_path).read_text(encoding="utf-8")
    assert "<script" not in html.lower()
    assert html.count("&lt;script&gt;") >= 15
    # the SVG plot is embedded as an image (scripts in <img> never run), base64-encoded
    assert "data:image/svg+xml;base64," in html


def test_map_report_gives_verdict_per_wafer_and_failed_sites(map_dir, samples):
    html = write_report(map_dir).read_text(encoding="utf-8")
    assert html.index("Map fails") < html.index("Statistics, wafer LK-0412-03")
    assert "1 site could not be fitted" in html
    assert "wafer LK-0412-04: oxide.thickness_nm: non-uniformity 2.9 % above 2.0 %" in html
    assert "lot0412_map.csv" in html and "file not found at report time" in html
    assert "non-numeric psi_deg at line 812" in html
    assert "non-uniformity %" in html and ">1.44<" in html
    # conftest.map_sites: the two edge sites of wafer 04 lie 5.5 nm low (145.3 nm < 146 nm); one of
    # them failed to fit, so one site is out of spec
    assert re.search(r"sites out of spec</th><td>1<", html)
    assert "oxide.thickness_nm = 145.3" in html  # the out-of-spec site with its value
    # the spec as a table: limits and uniformity
    assert re.search(r'oxide.thickness_nm</td><td class="num">146</td><td class="num">152</td>', html)
    assert "max nonuniformity pct 2" in html


def test_map_without_spec_or_sites_csv_still_renders(tmp_path):
    (tmp_path / "summary.json").write_text(json.dumps({"wafers": [{"wafer": "A1", "parameters": {}}]}))
    html = render_report(tmp_path)
    assert "Map judged without a spec" in html
    assert "No sites.csv" in html


def test_check_report_bands_yield_and_drift(check_dir):
    html = write_report(check_dir).read_text(encoding="utf-8")
    assert "Recipe check fails" in html
    assert "measured band &#39;visible anti-reflection&#39; fails: worst margin -0.0023 at 640 nm" in html
    assert "expected yield 91.3 % (95 % interval 90.8 % .. 91.9 %) over 10000 trials" in html
    # drift: the largest deviation (H2, +2.61 nm) is listed first
    assert html.index("H2.thickness_nm") < html.index("L1.thickness_nm</td><td class=\"num\">110")
    assert "54.61 ± 0.21" in html and "+5.02" in html
    # sensitivity: the most critical layer (first in the ranking) leads the table
    sens = html[html.index("Thickness sensitivity"):html.index("Tolerance yield")]
    assert sens.index(">H2<") < sens.index(">H1<")
    assert "0.00556" in sens and "Delta E per nm" in sens
    # colour values, drift fit facts, recorded digests
    assert "delta_e" in html and "common thickness scale (pre-fit)" in html and "1.012" in html
    assert "c1" * 32 in html and "recorded at run time" in html


def test_all_three_jobs_in_one_folder_keep_their_order(tmp_path, samples):
    (tmp_path / "check.json").write_text(json.dumps(samples.check_json()))
    (tmp_path / "result.json").write_text(json.dumps(samples.fit_result()))
    samples.write_map_dir(tmp_path, samples.map_summary(), samples.map_sites())
    html = render_report(tmp_path)
    kinds = re.findall(r'data-kind="(\w+)"', html)
    assert kinds == ["fit", "map", "check"]
    # the page title carries the worst verdict of the folder
    assert "<title>[FAIL] lamina report: Fit, Wafer map, Coating recipe check" in html


@pytest.mark.parametrize("name", ["result.json", "summary.json", "check.json"])
def test_minimal_files_render(tmp_path, name):
    (tmp_path / name).write_text("{}")
    html = render_report(tmp_path)
    assert 'id="verdict"' in html and CAUTION in html


def test_broken_json_names_file_line_and_column(tmp_path):
    (tmp_path / "result.json").write_text('{\n  "converged": true,\n  "message": oops\n}')
    with pytest.raises(LaminaInputError) as info:
        render_report(tmp_path)
    assert "result.json:3:14" in str(info.value)


def test_json_that_is_not_an_object_is_an_input_error(tmp_path):
    (tmp_path / "check.json").write_text("[1, 2]")
    with pytest.raises(LaminaInputError, match="not a JSON object"):
        render_report(tmp_path)


def test_folder_without_outputs_is_an_input_error(tmp_path):
    (tmp_path / "notes.txt").write_text("nothing here")
    with pytest.raises(LaminaInputError, match="result.json, summary.json, check.json"):
        write_report(tmp_path)
    assert not (tmp_path / "report.html").exists()


def test_rebuild_leaves_inputs_untouched_and_no_temporary_files(check_dir):
    before = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in check_dir.iterdir()}
    write_report(check_dir)
    write_report(check_dir)  # a rebuild replaces the report
    after = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in check_dir.iterdir()}
    assert set(after) == set(before) | {"report.html"}
    assert all(after[name] == digest for name, digest in before.items())


@pytest.mark.parametrize("value, sigma, text", [
    # Uncertainty to two significant digits and the value to the same decimal (JCGM 100:2008,
    # "GUM", sec. 7.2.6; from memory)
    (101.23456, 0.01234, "101.235 ± 0.012"),
    (1.45321, 0.00052, "1.45321 ± 0.00052"),
    (149.6, 2.345, "149.6 ± 2.3"),
    (1234.5, 56.0, "1234 ± 56"),
    (3.0, None, "3"),
])
def test_value_and_uncertainty_formatting(value, sigma, text):
    assert fmt_pm(value, sigma) == text


def test_plots_come_in_job_order_with_their_file_names(tmp_path, samples):
    (tmp_path / "summary.json").write_text(json.dumps(samples.map_summary()))
    for name in ("trend_t.png", "histogram_t.png", "map_t_LK-0412-03.png", "radial_t.png", "zz_extra.png"):
        samples.write_plot(tmp_path / name, name)
    html = render_report(tmp_path)
    names = re.findall(r'<figcaption><span class="mono">([^<]+)</span>', html)
    assert names == ["map_t_LK-0412-03.png", "radial_t.png", "histogram_t.png", "trend_t.png", "zz_extra.png"]


@pytest.mark.parametrize("reduced, status", [(1.1, "pass"), (7.9, "warn"), (0.05, "warn")])
def test_converged_fit_with_odd_chi_square_asks_for_review(tmp_path, samples, reduced, status):
    result = samples.fit_result()
    result["warnings"] = []
    result["statistics"]["reduced_chi2"] = reduced
    (tmp_path / "result.json").write_text(json.dumps(result))
    assert f'<div class="verdict {status}" data-kind="fit">' in render_report(tmp_path)
