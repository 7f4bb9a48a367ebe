"""lamina.simulate: Dataset layout, units, batching, scalars, errors."""
import numpy as np
import pytest
import tmm

import lamina
from lamina.dispersion.cauchy import Cauchy
from lamina.dispersion.constant import Constant
from lamina.errors import LaminaInputError
from lamina.optics import delta_from_tmm, solve
from lamina.parameters import Param
from lamina.stack import Layer, Stack

# demo stack (invented numbers, for tests only): a Cauchy oxide on a constant-index substrate
OXIDE = dict(A=1.45, B_um2=0.0036)
SUBSTRATE = (3.88, 0.02)


def oxide_stack(thickness=102.0, **extra):
    return Stack([Layer("oxide", Cauchy(**OXIDE), Param(thickness, vary=True))], Constant(*SUBSTRATE), **extra)


def test_dims_coords_units():
    wl = np.linspace(400, 800, 9)
    ang = [65.0, 70.0, 75.0]
    ds = lamina.simulate(oxide_stack(), wavelength_nm=wl, angle_deg=ang)
    assert ds.psi.dims == ("angle", "wavelength")
    np.testing.assert_array_equal(ds.wavelength.values, wl)
    np.testing.assert_array_equal(ds.angle.values, ang)
    assert ds.wavelength.attrs["units"] == "nm" and ds.angle.attrs["units"] == "deg"
    expected = {"psi", "delta", "R", "T", "Rs", "Rp", "Ts", "Tp", "A", "N", "C", "S", "P",
                "eps_pseudo_1", "eps_pseudo_2"}
    assert set(ds.data_vars) == expected
    assert ds.psi.attrs["units"] == "deg" and ds.delta.attrs["units"] == "deg"
    assert ds.R.attrs["units"] == "1"
    assert all(np.all(np.isfinite(ds[v].values)) for v in expected)


def test_values_match_tmm_for_the_evaluated_indices():
    # simulate() = materials evaluated by the stack + solve(); checked against tmm.ellips
    # (Byrnes, arXiv:1603.02720) for the same indices
    stack = oxide_stack()
    wl = np.array([450.0, 632.8])
    ds = lamina.simulate(stack, wavelength_nm=wl, angle_deg=70.0)
    n_oxide = Cauchy(**OXIDE).nk(wl)
    for w, lam in enumerate(wl):
        ell = tmm.ellips([1.0, n_oxide[w], complex(*SUBSTRATE)], [np.inf, 102.0, np.inf], np.radians(70.0), lam)
        assert ds.psi.values[0, w] == pytest.approx(np.degrees(ell["psi"]), abs=1e-7)
        assert ds.delta.values[0, w] == pytest.approx(float(delta_from_tmm(ell["Delta"])), abs=1e-7)


def test_scalars_become_length_one_axes():
    ds = lamina.simulate(oxide_stack(), wavelength_nm=633.0, angle_deg=70.0)
    assert ds.psi.shape == (1, 1)
    assert ds.wavelength.values.tolist() == [633.0]


def test_batch_equals_loop_of_single_evaluations():
    stack = oxide_stack()
    wl = np.linspace(350, 900, 12)
    thickness = np.array([5.0, 102.0, 480.0, 1000.0])
    a_values = np.array([1.44, 1.45, 1.46, 1.47])
    values = {"oxide.thickness_nm": thickness, "oxide.material.A": a_values}
    ds = lamina.simulate(stack, wavelength_nm=wl, angle_deg=[60.0, 75.0], values=values)
    assert ds.psi.dims == ("batch", "angle", "wavelength")
    np.testing.assert_array_equal(ds["oxide.thickness_nm"].values, thickness)
    for b in range(thickness.size):
        single = lamina.simulate(stack.with_values({"oxide.thickness_nm": thickness[b],
                                                    "oxide.material.A": a_values[b]}),
                                 wavelength_nm=wl, angle_deg=[60.0, 75.0])
        for name in ("psi", "delta", "R", "T", "N", "C", "S", "P", "eps_pseudo_1"):
            np.testing.assert_allclose(ds[name].values[b], single[name].values, rtol=1e-12, atol=1e-12)


def test_thick_substrate_and_instrument_attrs():
    glass = Stack([Layer("coat", Constant(1.38), 99.6)], Constant(1.52), substrate_thickness_mm=1.0)
    instrument = lamina.Instrument(angle_spread_deg=0.2)
    ds = lamina.simulate(glass, wavelength_nm=[450.0, 550.0], angle_deg=[0.0, 60.0], instrument=instrument)
    assert ds.attrs["instrument_angle_spread_deg_sigma"] == 0.2
    assert np.all(ds.P.values[1] < 1.0)  # backside reflection depolarizes
    np.testing.assert_allclose(ds.A.values, 0.0, atol=1e-12)


def test_solver_input_errors_are_user_errors():
    with pytest.raises(LaminaInputError):
        lamina.simulate(oxide_stack(), wavelength_nm=[[500.0]], angle_deg=70.0)
    with pytest.raises(LaminaInputError):
        lamina.simulate(oxide_stack(), wavelength_nm=500.0, angle_deg=90.0)
    with pytest.raises(LaminaInputError):
        solve([1.0, 1.5, 3.0], [-1.0], [True], 500.0, 70.0)
    with pytest.raises(LaminaInputError):
        solve([1.0, 1.5, 3.0], [10.0, 5.0], [True], 500.0, 70.0)
    with pytest.raises(LaminaInputError):
        solve([1.0, np.ones(3), 3.0], [10.0], [True], [500.0, 600.0], 70.0)
    with pytest.raises(LaminaInputError):
        lamina.simulate(oxide_stack(), wavelength_nm=-5.0, angle_deg=70.0)


def test_bandwidth_beyond_a_material_range_names_the_cause():
    from lamina import materials
    bare_si = Stack([], materials.get("Si"))
    lo = materials.get("Si").valid_range_nm[0]
    with pytest.raises(LaminaInputError, match="bandwidth"):
        lamina.simulate(bare_si, wavelength_nm=[lo + 1.0, 600.0], angle_deg=70.0,
                        instrument=lamina.Instrument(bandwidth_nm=4.0))
