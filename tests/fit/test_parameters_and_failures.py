"""Parameter names and ties; impossible models and bad input give clear outcomes, not crashes."""
import json
import math

import numpy as np
import pytest

import lamina
from lamina.dispersion import Constant, Lorentz
from lamina.errors import LaminaInputError
from lamina.fit.objective import wrap_degrees
from lamina.fit.parameters import ParameterTable, translate_expr
from lamina.parameters import Param
from lamina.stack import Layer, Stack

SI = 3.882 + 0.019j   # convention anchor of DEVELOPERS.md (from memory, ~Green 2008)
NAMES = {"oxide.thickness_nm": "p0", "top-coat.thickness_nm": "p1", "film.material.oscillators.1.center_ev": "p2"}


def test_expr_translation_by_token():
    text, used = translate_expr("2*top-coat.thickness_nm - oxide.thickness_nm/3 + sqrt(1.5e-3)", NAMES, "x")
    assert text == "2*p1 - p0/3 + sqrt(1.5e-3)"
    assert used == ("top-coat.thickness_nm", "oxide.thickness_nm")
    assert translate_expr("film.material.oscillators.1.center_ev*1", NAMES, "x")[0] == "p2*1"


@pytest.mark.parametrize("expr, message", [
    ("oxide.thickness * 2", "unknown parameter 'oxide.thickness'"),
    ("__import__('os')", "unknown parameter '__import__'"),
    ("oxide.thickness_nm; 1", "not allowed"),
    ("open", "unknown parameter 'open'"),
    ("oxide.thickness_nm[0]", "not allowed"),
])
def test_bad_expressions_are_input_errors(expr, message):
    with pytest.raises(LaminaInputError, match=message):
        translate_expr(expr, NAMES, "film.thickness_nm")


def test_tie_cycle_is_an_input_error():
    table = ParameterTable()
    table.add("a.thickness_nm", Param(1.0, expr="b.thickness_nm"))
    table.add("b.thickness_nm", Param(1.0, expr="a.thickness_nm + 1"))
    with pytest.raises(LaminaInputError, match="depends on itself"):
        table.resolve_exprs()


def test_ties_evaluate_vectorized():
    table = ParameterTable()
    table.add("a.thickness_nm", Param(10.0, 0, 100, vary=True))
    table.add("b.thickness_nm", Param(1.0, expr="a.thickness_nm * 2 + c.thickness_nm"))
    table.add("c.thickness_nm", Param(5.0))
    table.add("d.thickness_nm", Param(1.0, expr="b.thickness_nm - 1"))
    table.resolve_exprs()
    values = table.values(np.array([[1.0], [2.0], [3.0]]))
    assert np.allclose(values["b.thickness_nm"], [7.0, 9.0, 11.0])
    assert np.allclose(values["d.thickness_nm"], [6.0, 8.0, 10.0])
    params = table.to_lmfit()
    assert all(name.isidentifier() for name in params)


def test_delta_residual_wraps():
    # Delta is an angle: 359 and 1 degrees are 2 degrees apart (common practice)
    assert np.allclose(wrap_degrees([358.0, -358.0, 180.0, -180.0, 10.0]), [-2.0, 2.0, 180.0, 180.0, 10.0])


def _thick_absorber_rt(tmm_data):
    # a strongly absorbing 400 nm Lorentz film on a glass slab: R and T that no transparent film can give
    wl = np.linspace(350, 900, 23)
    return tmm_data.slab_rt(lambda w: tmm_data.lorentz_index(w, 2.5, 3.0, 2.8, 0.9), 400.0,
                            lambda w: np.full_like(w, 1.52, dtype=complex), 1.0, wl, sigma=0.002,
                            rng=np.random.default_rng(1))


def test_impossible_model_is_not_converged_with_a_message(tmm_data):
    data = _thick_absorber_rt(tmm_data)
    transparent = Stack([Layer("film", Constant(Param(1.6, 1.3, 1.8, vary=True)),
                               Param(100.0, 0.0, 150.0, vary=True))], Constant(1.52), substrate_thickness_mm=1.0)
    result = lamina.fit(transparent, data)
    assert not result.success
    payload = result.to_dict()
    assert payload["converged"] is False
    assert "no acceptable fit" in payload["message"]
    assert any("far from 1" in w for w in payload["warnings"])
    json.loads(result.to_json())    # still valid JSON


def test_no_free_parameters_is_an_input_error(tmm_data):
    data = _thick_absorber_rt(tmm_data)
    fixed = Stack([Layer("film", Constant(1.6), 100.0)], Constant(1.52), substrate_thickness_mm=1.0)
    with pytest.raises(LaminaInputError, match="no free parameters"):
        lamina.fit(fixed, data)


def test_unknown_parameter_in_expr_is_an_input_error(tmm_data):
    data = _thick_absorber_rt(tmm_data)
    stack = Stack([Layer("film", Constant(1.6), Param(100.0, 0, 200, vary=True)),
                   Layer("cap", Constant(1.4), Param(10.0, expr="film.thicknes_nm / 10"))],
                  Constant(1.52), substrate_thickness_mm=1.0)
    with pytest.raises(LaminaInputError, match="unknown parameter 'film.thicknes_nm'"):
        lamina.fit(stack, data)


def test_data_outside_a_material_range_names_file_and_material(tmm_data):
    from lamina.dispersion.tabulated import Table
    data = _thick_absorber_rt(tmm_data)     # 350-900 nm
    narrow = Table([400.0, 800.0], [1.5, 1.5], [0.0, 0.0], name="narrow")
    stack = Stack([Layer("film", narrow, Param(100.0, 0, 200, vary=True))], Constant(1.52),
                  substrate_thickness_mm=1.0)
    with pytest.raises(LaminaInputError) as info:
        lamina.fit(stack, data)
    text = str(info.value)
    assert "tmm-rt" in text and "narrow" in text and "400" in text


def test_parameter_at_bound_and_correlation_warnings(tmm_data):
    # a film whose thickness must exceed the upper bound, and a pair (thickness, n) that trade off
    wl = np.linspace(400, 800, 21)
    data = tmm_data.ellipsometry([lambda w: np.ones_like(w), lambda w: np.full_like(w, 1.46, dtype=complex),
                                  lambda w: np.full_like(w, SI, dtype=complex)], [30.0], (70.0,), wl,
                                 sigma_psi=0.02, sigma_delta=0.05, rng=np.random.default_rng(4))
    bounded = Stack([Layer("oxide", Constant(1.46), Param(20.0, 0.0, 25.0, vary=True))], Constant(SI.real, SI.imag))
    result = lamina.fit(bounded, data)
    entry = result.parameters["oxide.thickness_nm"]
    assert entry["at_bound"] is True and entry["value"] == pytest.approx(25.0)
    assert entry["ci90"][1] <= 25.0
    assert any("upper bound" in w for w in result.warnings)
    # a thin transparent film: thickness and index strongly correlated (Azzam and Bashara 1977, sec. 4.7)
    coupled = Stack([Layer("oxide", Constant(Param(1.5, 1.3, 1.7, vary=True)), Param(28.0, 0.0, 100.0, vary=True))],
                    Constant(SI.real, SI.imag))
    result = lamina.fit(coupled, data)
    r = result.correlations["oxide.thickness_nm"]["oxide.material.n"]
    assert abs(r) > 0.95
    assert any("strongly correlated" in w and "oxide.material.n" in w for w in result.warnings)


def test_undetermined_parameter_has_no_finite_error(tmm_data):
    # an oscillator far outside the measured range with zero amplitude: its width changes nothing
    wl = np.linspace(400, 800, 21)
    data = tmm_data.ellipsometry([lambda w: np.ones_like(w), lambda w: np.full_like(w, 1.46, dtype=complex),
                                  lambda w: np.full_like(w, SI, dtype=complex)], [100.0], (70.0,), wl,
                                 sigma_psi=0.02, sigma_delta=0.05, rng=np.random.default_rng(4))
    film = Lorentz(1.46 ** 2, [{"amplitude": 0.0, "center_ev": 20.0,
                                "broadening_ev": Param(1.0, 0.1, 5.0, vary=True)}])
    stack = Stack([Layer("oxide", film, Param(95.0, 0, 300, vary=True))], Constant(SI.real, SI.imag))
    result = lamina.fit(stack, data)
    payload = result.to_dict()
    assert payload["parameters"]["oxide.material.oscillators.1.broadening_ev"]["stderr"] is None
    assert any("not determined" in w for w in payload["warnings"])
    assert math.isfinite(payload["parameters"]["oxide.thickness_nm"]["stderr"])


def test_fit_model_equals_lamina_simulate_for_a_slab_stack():
    # the fit's fast path (cached fixed media, direct solver calls) must give what lamina.simulate gives
    import xarray as xr
    from lamina.fit.objective import make_block
    film = Lorentz(2.1, [{"amplitude": Param(1.1, 0.1, 3.0, vary=True), "center_ev": 4.0, "broadening_ev": 0.7}])
    stack = Stack([Layer("film", film, Param(150.0, 0.0, 400.0, vary=True)),
                   Layer("cap", Constant(1.38), Param(80.0, expr="film.thickness_nm / 2"))],
                  Constant(1.52), substrate_thickness_mm=0.7, exit=Constant(1.33))
    wl, angles = np.linspace(350, 900, 12), np.array([0.0, 45.0, 70.0])
    grid = np.zeros((angles.size, wl.size))
    ds = xr.Dataset({q: (("angle", "wavelength"), grid) for q in ("psi", "delta", "R", "T")},
                    coords={"angle": angles, "wavelength": wl})
    block = make_block("s", ds, stack)
    block.drivers = {"film.thickness_nm": "film.thickness_nm", "cap.thickness_nm": "cap.thickness_nm",
                     "film.material.oscillators.1.amplitude": "film.material.oscillators.1.amplitude"}
    block.prepare()
    values = {"film.thickness_nm": np.array([150.0, 170.0]), "cap.thickness_nm": np.array([75.0, 85.0]),
              "film.material.oscillators.1.amplitude": np.array([1.1, 1.4])}
    ours = block.simulate(values, 2)
    reference = lamina.simulate(stack, wavelength_nm=wl, angle_deg=angles, values=values)
    for q in ("psi", "R", "T"):
        assert np.allclose(ours[q], reference[q].transpose("batch", "angle", "wavelength").values, atol=1e-12)
    delta_diff = wrap_degrees(ours["delta"] - reference["delta"].transpose("batch", "angle", "wavelength").values)
    assert np.allclose(delta_diff, 0.0, atol=1e-9)
