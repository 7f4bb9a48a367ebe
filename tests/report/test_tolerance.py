"""Reports never crash on odd JSON: any value of any shape under any key still renders.

The commands call write_report last; a report must not turn a finished fit, map or
check into a traceback because an optional field had an unexpected shape.
"""
from __future__ import annotations

import json

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lamina.report.html import render_report

JSON_SCALARS = st.none() | st.booleans() | st.integers(-10**6, 10**6) | \
    st.floats(allow_nan=False, allow_infinity=False) | st.text(max_size=12)
JSON_VALUES = st.recursive(JSON_SCALARS, lambda inner: st.lists(inner, max_size=3) |
                           st.dictionaries(st.text(max_size=8), inner, max_size=3), max_leaves=8)
KEYS = {
    "result.json": ["converged", "message", "statistics", "parameters", "correlations", "warnings", "provenance"],
    "summary.json": ["wafers", "pass", "n_failed", "n_sites", "spec", "inputs", "reasons"],
    "check.json": ["design", "sensitivity", "yield", "measured", "pass", "notes", "provenance"],
}


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=st.sampled_from(sorted(KEYS)), data=st.data())
def test_any_shape_under_known_keys_renders(tmp_path, samples, name, data):
    base = {"result.json": samples.fit_result(), "summary.json": samples.map_summary(),
            "check.json": samples.check_json()}[name]
    for key in data.draw(st.lists(st.sampled_from(KEYS[name]), min_size=1, max_size=3, unique=True)):
        base[key] = data.draw(JSON_VALUES)
    folder = tmp_path / f"case-{name}"
    folder.mkdir(exist_ok=True)
    (folder / name).write_text(json.dumps(base))
    html = render_report(folder)
    assert 'id="verdict"' in html and "traceable reference samples" in html


NESTED = {
    "result.json": [("statistics", "rms"), ("statistics", "reduced_chi2"), ("parameters", "oxide.thickness_nm"),
                    ("correlations", "oxide.thickness_nm"), ("provenance", "data_sha256")],
    "summary.json": [("wafers", "LK-0412-03"), ("spec", "limits"), ("spec", "uniformity"), ("inputs", "map")],
    "check.json": [("design", "bands"), ("design", "color"), ("sensitivity", "layers"), ("sensitivity", "ranking"),
                   ("yield", "ci95"), ("measured", "drift"), ("measured", "fit"), ("provenance", "sha256")],
}


@settings(max_examples=50, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=st.sampled_from(sorted(NESTED)), data=st.data())
def test_any_shape_one_level_down_renders(tmp_path, samples, name, data):
    base = {"result.json": samples.fit_result(), "summary.json": samples.map_summary(),
            "check.json": samples.check_json()}[name]
    for outer, inner in data.draw(st.lists(st.sampled_from(NESTED[name]), min_size=1, max_size=3, unique=True)):
        base[outer][inner] = data.draw(JSON_VALUES | st.lists(st.dictionaries(
            st.sampled_from(["name", "pass", "worst_margin", "at_nm", "value", "stderr", "ci90", "bands"]),
            JSON_VALUES, max_size=4), max_size=3))
    folder = tmp_path / f"nested-{name}"
    folder.mkdir(exist_ok=True)
    (folder / name).write_text(json.dumps(base))
    html = render_report(folder)
    assert 'id="verdict"' in html
