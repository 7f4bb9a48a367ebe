"""Lorentz law and dilute-medium helpers, checked against published relations."""
import importlib.util
import math
import pathlib

import numpy as np
import pytest
from scipy import constants
from scipy.integrate import quad

from lamina.dispersion import LAWS, Lorentz, from_toml
from lamina.dispersion.lorentz import (dilute_index, exact_index, lorentz_epsilon,
                                       oscillator_susceptibility_si)
from lamina.errors import LaminaInputError

_spec = importlib.util.spec_from_file_location("kk_helper", pathlib.Path(__file__).with_name("kk.py"))
kk = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(kk)

OSCILLATORS = [{"amplitude": 1.2, "center_ev": 3.0, "broadening_ev": 0.25},
               {"amplitude": 0.6, "center_ev": 6.0, "broadening_ev": 0.8}]


def make_law():
    return Lorentz(1.8, OSCILLATORS)


def test_f_sum_rule():
    # f-sum rule: int_0^inf E eps2(E) dE = (pi/2) sum_j A_j E_j^2
    # (F. Wooten, Optical Properties of Solids, 1972; Dressel and Gruner 2002)
    law = make_law()
    integral, _ = quad(lambda e: e * law.epsilon_ev(np.array([e]))[0].imag, 0, np.inf, limit=500,
                       points=None)
    expected = math.pi / 2 * sum(o["amplitude"] * o["center_ev"] ** 2 for o in OSCILLATORS)
    assert integral == pytest.approx(expected, rel=1e-6)


def test_static_and_high_energy_limits():
    # eps(0) = eps_inf + sum A_j; eps -> eps_inf far above all resonances
    # (Fox, Optical Properties of Solids, 2010: static and high-frequency limits)
    law = make_law()
    assert law.epsilon_ev(np.array([0.0]))[0] == pytest.approx(1.8 + 1.2 + 0.6, abs=1e-12)
    far = law.epsilon_ev(np.array([1e5]))[0]
    assert far.real == pytest.approx(1.8, abs=1e-6)
    assert abs(far.imag) < 1e-6


def test_normal_and_anomalous_dispersion_and_absorption_peak():
    # Below a resonance n rises with photon energy (normal dispersion); across it n falls
    # (anomalous dispersion) while k peaks near E0 (Fox 2010; Born and Wolf 1999)
    law = Lorentz(1.0, [{"amplitude": 1.0, "center_ev": 3.0, "broadening_ev": 0.1}])
    energy = np.linspace(0.5, 6.0, 5501)
    nk = np.sqrt(law.epsilon_ev(energy))
    n, k = nk.real, nk.imag
    below = energy < 2.7
    assert np.all(np.diff(n[below]) > 0)
    near = (energy > 3.0) & (energy < 3.05)
    assert np.all(np.diff(n[near]) < 0)
    e_peak = energy[np.argmax(k)]
    assert abs(e_peak - 3.0) < 0.1
    assert np.all(k >= 0)


def test_kramers_kronig_consistency():
    # eps1 - eps_inf = (2/pi) P int E' eps2(E') / (E'^2 - E^2) dE'
    # (Kramers-Kronig; Wooten 1972); numerical integral vs closed form
    law = make_law()
    energy = np.linspace(0.3, 8.0, 25)
    numeric = kk.kk_eps1_minus_background(lambda e: law.epsilon_ev(e).imag, energy)
    closed = law.epsilon_ev(energy).real - 1.8
    np.testing.assert_allclose(numeric, closed, atol=1e-3)


def test_pure_function_matches_class_and_batches():
    law = make_law()
    energy = np.array([1.0, 2.5, 4.0])
    np.testing.assert_allclose(law.epsilon_ev(energy), lorentz_epsilon(energy, 1.8, OSCILLATORS))
    batch = law.epsilon_ev(energy, {"oscillators.1.center_ev": np.array([2.5, 3.0, 3.5, 4.0])})
    assert batch.shape == (4, 3)
    np.testing.assert_allclose(batch[1], law.epsilon_ev(energy))
    single = law.with_values({"oscillators.1.center_ev": 3.5}).epsilon_ev(energy)
    np.testing.assert_allclose(batch[2], single)


def test_plasma_frequency_of_free_electrons():
    # omega_p^2 = N e^2 / (eps0 m): plasma frequency f_p ~ 8.98 sqrt(N [m^-3]) Hz
    # (F. F. Chen, Introduction to Plasma Physics, 1984: f_p ~ 9 sqrt(n) Hz; 8.98 from memory)
    density = 1.0e18
    chi = oscillator_susceptibility_si(density, constants.e, constants.m_e, 0.0, 0.0, 1.0)
    f_p = math.sqrt(-chi.real) / (2 * math.pi)
    assert f_p == pytest.approx(8.98 * math.sqrt(density), rel=1e-3)


def test_si_susceptibility_equals_photon_energy_form():
    # The SI oscillator (Jackson 1999) is a Lorentz term with A = w_p^2 / w0^2,
    # E0 = hbar w0, Gamma = hbar gamma (unit conversion, common practice)
    hbar_ev = constants.hbar / constants.e
    density, w0, gamma = 2.5e25, 2.0e16, 3.0e14
    omega = np.linspace(0.5e16, 3.5e16, 7)
    chi_si = oscillator_susceptibility_si(density, constants.e, constants.m_e, w0, gamma, omega)
    plasma_sq = density * constants.e ** 2 / (constants.epsilon_0 * constants.m_e)
    osc = [{"amplitude": plasma_sq / w0 ** 2, "center_ev": hbar_ev * w0, "broadening_ev": hbar_ev * gamma}]
    np.testing.assert_allclose(lorentz_epsilon(hbar_ev * omega, 1.0, osc) - 1.0, chi_si, rtol=1e-10)


def test_dilute_index_holds_for_small_chi_and_fails_for_large():
    # n ~ 1 + chi/2 for |chi| << 1 (first-order expansion of sqrt(1 + chi); error ~ chi^2/8)
    for chi in (1e-4, 3e-4 + 1e-5j):
        err = abs(dilute_index(chi) - exact_index(chi))
        assert err < abs(chi) ** 2 / 8 * 1.01
    # a gas near room conditions: air n - 1 = 2.9e-4 at 589 nm (CRC Handbook, "from memory")
    chi_air = (1 + 2.9e-4) ** 2 - 1
    assert dilute_index(chi_air).real == pytest.approx(1 + 2.9e-4, abs=1e-7)
    # a solid (chi ~ 1.1 for glass) is far outside the approximation
    assert abs(dilute_index(1.1) - exact_index(1.1)) > 0.1


def test_toml_round_trip_and_names():
    table = {"law": "lorentz", "eps_inf": {"value": 1.8, "min": 1.0, "max": 3.0},
             "oscillators": [{"amplitude": 1.2, "center_ev": {"value": 3.0, "vary": True}, "broadening_ev": 0.25}]}
    law = from_toml(table, "film.material")
    assert list(law.params) == ["eps_inf", "oscillators.1.amplitude", "oscillators.1.center_ev",
                                "oscillators.1.broadening_ev"]
    assert law.params["oscillators.1.center_ev"].vary
    again = from_toml(law.to_toml(), "film.material")
    assert again.params == law.params
    assert LAWS["lorentz"] is Lorentz


@pytest.mark.parametrize("bad, where", [
    ({"broadening_ev": -0.1}, "film.material.oscillators.1.broadening_ev"),
    ({"amplitude": -1.0}, "film.material.oscillators.1.amplitude"),
    ({"center_ev": "x"}, "film.material.oscillators.1.center_ev"),
])
def test_invalid_oscillator_named(bad, where):
    osc = {"amplitude": 1.0, "center_ev": 3.0, "broadening_ev": 0.1, **bad}
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "lorentz", "eps_inf": 1.0, "oscillators": [osc]}, "film.material")
    assert err.value.where == where


def test_missing_and_unknown_keys_named():
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "lorentz", "oscillators": [{"amplitude": 1.0, "center_ev": 3.0}]}, "m")
    assert "broadening_ev" in str(err.value) and err.value.where == "m.oscillators.1"
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "lorentz", "oscillators": [], "eps_inf": 1}, "m")
    assert err.value.where == "m.oscillators"
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "lorentz", "oscilators": []}, "m")
    assert err.value.where == "m.oscilators"
