"""lamina fit / check write report.html next to their JSON, and the report agrees with it."""
from __future__ import annotations

import json

import pytest

from lamina.cli.main import main
from lamina.report.html import fmt_pm

OXIDE_MODEL = '''name = "oxide on silicon (invented demo)"
[[layers]]
name = "oxide"
thickness_nm = { value = 96.0, min = 0.0, max = 500.0 }
material = { law = "cauchy", A = 1.45, B_um2 = 0.0036 }
[substrate]
material = { law = "constant", n = 3.88, k = 0.02 }
'''

AR_RECIPE = '''name = "two-layer AR (invented demo)"
[[layers]]
name = "H1"
thickness_nm = 60.0
material = { law = "constant", n = 2.1, k = 0.0 }
[[layers]]
name = "L1"
thickness_nm = 99.6
material = { law = "constant", n = 1.38, k = 0.0 }
[substrate]
material = { law = "constant", n = 1.52, k = 0.0 }
'''

AR_TARGET = '''[[bands]]
name = "green AR <i>"
quantity = "R"
angle_deg = 0.0
polarization = "unpolarized"
wavelength_nm = [520.0, 580.0]
max = 0.02
[tolerances.default]
thickness_pct = 1.0
distribution = "gaussian"
'''


def test_fit_writes_a_report_that_matches_result_json(tmp_path, capsys):
    model = tmp_path / "oxide.toml"
    model.write_text(OXIDE_MODEL.replace("96.0", "100.0"))
    data = tmp_path / "w07 <center>.csv"
    assert main(["simulate", str(model), "--wavelengths", "350:850:25", "--angles", "70",
                 "--noise", "psi=0.02,delta=0.05", "--seed", "3", "-o", str(data), "--quiet"]) == 0
    model.write_text(OXIDE_MODEL)  # start 4 nm away from the truth
    out = tmp_path / "out"
    code = main(["fit", str(data), "--model", str(model), "--quiet", "-o", str(out)])
    result = json.loads((out / "result.json").read_text())
    html = (out / "report.html").read_text(encoding="utf-8")
    assert code == (0 if result["converged"] else 3)
    assert ("Fit converged" if result["converged"] else "Fit did not converge") in html
    thickness = result["parameters"]["oxide.thickness_nm"]
    assert f'<td class="name">oxide.thickness_nm</td><td class="num">{fmt_pm(thickness["value"], thickness["stderr"])}' \
        in html
    assert "w07 &lt;center&gt;.csv" in html and "<center>" not in html
    assert "<img" in html  # the fit's plots, embedded


def test_check_writes_a_report_with_the_band_verdicts(tmp_path):
    recipe, target = tmp_path / "ar2.toml", tmp_path / "target.toml"
    recipe.write_text(AR_RECIPE)
    target.write_text(AR_TARGET)
    out = tmp_path / "out"
    code = main(["check", str(recipe), "--target", str(target), "--trials", "300", "--quiet", "-o", str(out)])
    check = json.loads((out / "check.json").read_text())
    html = (out / "report.html").read_text(encoding="utf-8")
    assert code == (0 if check["pass"] else 1)
    assert ("Recipe check passes" if check["pass"] else "Recipe check fails") in html
    assert "green AR &lt;i&gt;" in html and "<i>" not in html
    assert "Tolerance yield" in html and "Thickness sensitivity" in html


def test_map_writes_a_report_with_the_wafer_verdict(tmp_path):
    import pandas as pd
    model = tmp_path / "oxide.toml"
    model.write_text(OXIDE_MODEL.replace("96.0", "100.0"))
    one = tmp_path / "one.csv"
    assert main(["simulate", str(model), "--wavelengths", "400:800:50", "--angles", "70",
                 "--noise", "psi=0.02,delta=0.05", "--seed", "4", "-o", str(one), "--quiet"]) == 0
    spectrum = pd.read_csv(one, comment="#")[["wavelength_nm", "angle_deg", "psi_deg", "delta_deg",
                                              "psi_err_deg", "delta_err_deg"]]
    sites = [pd.DataFrame({"site": i, "x_mm": x, "y_mm": y, **spectrum}) for i, (x, y) in
             enumerate([(0, 0), (40, 0), (0, -40)], start=1)]
    map_file = tmp_path / "map.csv"
    pd.concat(sites).to_csv(map_file, index=False)
    spec = tmp_path / "spec.toml"
    spec.write_text('[wafer]\ndiameter_mm = 150\nedge_exclusion_mm = 5\n'
                    '[limits."oxide.thickness_nm"]\nlower = 120.0\nupper = 130.0\n')
    model.write_text(OXIDE_MODEL)
    out = tmp_path / "out"
    code = main(["map", str(map_file), "--model", str(model), "--spec", str(spec), "--workers", "1",
                 "--quiet", "-o", str(out)])
    html = (out / "report.html").read_text(encoding="utf-8")
    # 100 nm everywhere against limits 120-130 nm: the wafer fails the spec
    assert code == 1
    summary = json.loads((out / "summary.json").read_text())
    reasons = [r for wafer in summary["wafers"].values() for r in wafer["reasons"]]
    assert "Map fails" in html and reasons
    assert all(r.replace("'", "&#39;") in html for r in reasons)
    assert html.count('<td class="name">oxide.thickness_nm</td>') >= 1
