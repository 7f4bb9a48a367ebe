"""Tauc-Lorentz law (Jellison and Modine, Appl. Phys. Lett. 69, 371 (1996); erratum 69, 2137)."""
import math

import numpy as np
import pytest
from scipy.integrate import quad

from lamina.dispersion import LAWS, from_toml
from lamina.dispersion.tauc_lorentz import TaucLorentz, tauc_lorentz_eps1_term, tauc_lorentz_eps2
from lamina.errors import LaminaInputError

# a-Si parameters of Jellison and Modine 1996 (from memory): A = 122 eV, E0 = 3.45 eV,
# C = 2.54 eV, Eg = 1.20 eV, eps_inf = 1.15.
A_SI = dict(eps_inf=1.15, gap_ev=1.20, oscillators=[{"amplitude_ev": 122.0, "center_ev": 3.45, "broadening_ev": 2.54}])


def eps2_by_hand(energy, a, e0, c, eg):
    """Jellison and Modine 1996 (eps2 of the TL law), written out for one scalar energy."""
    if energy <= eg:
        return 0.0
    return (a * e0 * c * (energy - eg) ** 2) / (((energy ** 2 - e0 ** 2) ** 2 + c ** 2 * energy ** 2) * energy)


def eps1_by_quadrature(energy, a, e0, c, eg):
    """eps1 - eps_inf = (2/pi) P int_0^inf E' eps2(E') / (E'^2 - E^2) dE' (Kramers-Kronig;
    e.g. Jellison and Modine 1996), with scipy's Cauchy-weight quadrature (QUADPACK QAWC)."""
    f = lambda x: x * eps2_by_hand(x, a, e0, c, eg) / (x + energy)
    total = 0.0
    top = eg
    if energy > eg:
        top = 2 * energy + eg
        total += quad(f, eg, top, weight="cauchy", wvar=energy, limit=400)[0]
    total += quad(lambda x: f(x) / (x - energy), top, 60.0, limit=400, points=[e0] if top < e0 < 60 else None)[0]
    total += quad(lambda x: f(x) / (x - energy), 60.0, np.inf, limit=400)[0]
    return 2.0 / math.pi * total


def test_registered():
    assert LAWS["tauc_lorentz"] is TaucLorentz


def test_eps2_is_zero_at_and_below_the_gap():
    # Jellison and Modine 1996: eps2 = 0 for E <= Eg
    law = TaucLorentz(**A_SI)
    energy = np.array([0.0, 0.3, 1.0, 1.19999, 1.20])
    assert np.all(law.epsilon_ev(energy).imag == 0.0)
    assert np.all(law.epsilon_ev(np.array([1.21, 2.0, 6.0])).imag > 0.0)


@pytest.mark.parametrize("energy", [1.5, 2.0, 3.45, 4.2, 7.0])
def test_eps2_matches_published_formula_by_hand(energy):
    law = TaucLorentz(**A_SI)
    expected = eps2_by_hand(energy, 122.0, 3.45, 2.54, 1.20)
    assert law.epsilon_ev(np.array([energy])).imag[0] == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("params", [
    (122.0, 3.45, 2.54, 1.20),   # a-Si, Jellison and Modine 1996 (from memory)
    (50.0, 8.0, 1.0, 4.5),       # a narrow oscillator high above a wide gap (nitride-like, invented)
    (20.0, 2.0, 3.9, 0.0),       # C close to 2 E0, no gap
    (80.0, 3.0, 0.4, 2.9),       # gap close to E0
])
def test_closed_form_eps1_matches_kramers_kronig_quadrature(params):
    energies = [0.01, 0.5, params[3], params[3] + 1e-7, params[1], 0.5 * (params[1] + params[3]) + 0.1, 5.0, 9.0]
    closed = tauc_lorentz_eps1_term(np.array(energies), *params)
    numeric = np.array([eps1_by_quadrature(e, *params) for e in energies])
    np.testing.assert_allclose(closed, numeric, atol=1e-6, rtol=1e-7)


def test_a_si_index_at_2_ev_has_the_right_magnitude():
    # amorphous Si has n ~ 4-4.5 and k ~ 0.5-1 near 2 eV (common practice)
    nk = TaucLorentz(**A_SI).nk(np.array([1239.841984 / 2.0]))[0]
    assert 3.8 < nk.real < 4.8
    assert 0.3 < nk.imag < 1.2


def test_finite_at_singular_points():
    law = TaucLorentz(eps_inf=1.0, gap_ev=1.5,
                      oscillators=[{"amplitude_ev": 100.0, "center_ev": 3.0, "broadening_ev": 2.0}])
    gamma = math.sqrt(3.0 ** 2 - 2.0 ** 2 / 2)
    energy = np.array([0.0, 1e-12, 1.5, 1.5 + 1e-15, 1.5 - 1e-15, 3.0, gamma])
    eps = law.epsilon_ev(energy)
    assert np.all(np.isfinite(eps))
    # eps1 is continuous through Eg (the log singularities cancel there)
    assert eps.real[2] == pytest.approx(law.epsilon_ev(np.array([1.5 + 1e-6])).real[0], abs=1e-4)
    # and its value at E = 0 is the limit from above
    assert eps.real[0] == pytest.approx(law.epsilon_ev(np.array([1e-3])).real[0], abs=1e-4)


def test_two_oscillators_add_up():
    osc1 = {"amplitude_ev": 60.0, "center_ev": 3.6, "broadening_ev": 1.5}
    osc2 = {"amplitude_ev": 30.0, "center_ev": 5.0, "broadening_ev": 2.0}
    energy = np.linspace(0.5, 8.0, 40)
    both = TaucLorentz(1.2, 1.7, [osc1, osc2]).epsilon_ev(energy)
    first = TaucLorentz(1.2, 1.7, [osc1]).epsilon_ev(energy)
    second = TaucLorentz(0.0, 1.7, [osc2]).epsilon_ev(energy)
    np.testing.assert_allclose(both, first + second, rtol=1e-12, atol=1e-12)
    assert "oscillators.2.center_ev" in TaucLorentz(1.2, 1.7, [osc1, osc2]).params


def test_batch_equals_loop_of_single_evaluations():
    law = TaucLorentz(**A_SI)
    energy = np.linspace(0.6, 6.5, 57)
    centers = np.array([3.0, 3.45, 3.9])
    gaps = np.array([1.0, 1.2, 1.6])
    batch = law.epsilon_ev(energy, {"oscillators.1.center_ev": centers, "gap_ev": gaps})
    assert batch.shape == (3, 57)
    for i in range(3):
        single = law.with_values({"oscillators.1.center_ev": centers[i], "gap_ev": gaps[i]}).epsilon_ev(energy)
        np.testing.assert_allclose(batch[i], single, rtol=1e-13, atol=1e-13)


def test_toml_round_trip():
    table = {"law": "tauc_lorentz", "eps_inf": {"value": 1.1, "min": 0.5, "max": 3.0},
             "gap_ev": 1.3,
             "oscillators": [{"amplitude_ev": 100.0, "center_ev": {"value": 3.5, "min": 3.0, "max": 4.0},
                              "broadening_ev": 2.2}]}
    law = from_toml(table, "film.material")
    assert law.params["oscillators.1.center_ev"].vary
    assert law.params["oscillators.1.center_ev"].max == 4.0
    again = from_toml(law.to_toml(), "film.material")
    assert again.to_toml() == law.to_toml()
    energy = np.linspace(1, 6, 11)
    np.testing.assert_array_equal(again.epsilon_ev(energy), law.epsilon_ev(energy))


@pytest.mark.parametrize("change, named", [
    ({"broadening_ev": 7.0}, "oscillators.1.broadening_ev"),     # C >= 2 E0
    ({"broadening_ev": 0.0}, "oscillators.1.broadening_ev"),     # C must be > 0
    ({"broadening_ev": -1.0}, "oscillators.1.broadening_ev"),
    ({"amplitude_ev": -5.0}, "oscillators.1.amplitude_ev"),
    ({"center_ev": 0.0}, "oscillators.1.center_ev"),
])
def test_invalid_oscillator_parameters_raise_one_clear_error(change, named):
    osc = {"amplitude_ev": 122.0, "center_ev": 3.45, "broadening_ev": 2.54, **change}
    table = {"law": "tauc_lorentz", "eps_inf": 1.15, "gap_ev": 1.2, "oscillators": [osc]}
    with pytest.raises(LaminaInputError) as err:
        from_toml(table, "film.material")
    assert err.value.where == "film.material." + named
    with pytest.raises(LaminaInputError) as err:
        TaucLorentz(1.15, 1.2, [osc])
    assert named.split(".")[-1] in str(err.value)


def test_invalid_gap_missing_and_unknown_keys():
    osc = {"amplitude_ev": 122.0, "center_ev": 3.45, "broadening_ev": 2.54}
    with pytest.raises(LaminaInputError, match="gap_ev"):
        from_toml({"law": "tauc_lorentz", "eps_inf": 1.0, "gap_ev": -0.1, "oscillators": [osc]}, "m")
    with pytest.raises(LaminaInputError, match="gap_ev"):
        from_toml({"law": "tauc_lorentz", "eps_inf": 1.0, "oscillators": [osc]}, "m")
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "tauc_lorentz", "eps_inf": 1.0, "gap_ev": 1.0,
                   "oscillators": [{**osc, "width_ev": 1.0}]}, "m")
    assert err.value.where == "m.oscillators.1.width_ev"
    with pytest.raises(LaminaInputError, match="oscillator"):
        from_toml({"law": "tauc_lorentz", "eps_inf": 1.0, "gap_ev": 1.0, "oscillators": []}, "m")


def test_relation_is_checked_for_batch_values_too():
    law = TaucLorentz(**A_SI)
    with pytest.raises(LaminaInputError, match="broadening_ev"):
        law.epsilon_ev(np.array([2.0]), {"oscillators.1.broadening_ev": np.array([2.0, 7.5])})
