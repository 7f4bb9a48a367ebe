"""Drude law: Kramers-Kronig, sum rule and textbook limits."""
import importlib.util
import math
import pathlib

import numpy as np
import pytest
from scipy.integrate import quad

from lamina.dispersion import Drude, from_toml
from lamina.dispersion.drude import drude_epsilon
from lamina.errors import LaminaInputError

_spec = importlib.util.spec_from_file_location("kk_helper", pathlib.Path(__file__).with_name("kk.py"))
kk = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(kk)


def test_kramers_kronig_consistency():
    # eps1 - eps_inf = (2/pi) P int E' eps2 / (E'^2 - E^2) dE' (Wooten 1972)
    law = Drude(1.5, 8.0, 0.3)
    energy = np.linspace(0.5, 8.0, 20)
    numeric = kk.kk_eps1_minus_background(lambda e: law.epsilon_ev(e).imag, energy)
    np.testing.assert_allclose(numeric, law.epsilon_ev(energy).real - 1.5, atol=1e-3)


def test_f_sum_rule():
    # int_0^inf E eps2(E) dE = (pi/2) Ep^2 (Wooten 1972, free-electron sum rule)
    law = Drude(1.0, 5.0, 0.4)
    integral, _ = quad(lambda e: e * law.epsilon_ev(np.array([max(e, 1e-12)]))[0].imag, 0, np.inf, limit=400)
    assert integral == pytest.approx(math.pi / 2 * 25.0, rel=1e-6)


def test_undamped_limit_and_screened_plasma_edge():
    # Gamma -> 0: eps = eps_inf - Ep^2 / E^2, zero at the screened plasma energy Ep / sqrt(eps_inf)
    # (Fox, Optical Properties of Solids, 2010)
    law = Drude(4.0, 2.0, 1e-9)
    assert law.epsilon_ev(np.array([1.0]))[0].real == pytest.approx(4.0 - 4.0, abs=1e-6)
    assert law.epsilon_ev(np.array([0.5]))[0].real == pytest.approx(4.0 - 16.0, abs=1e-6)
    eps = law.epsilon_ev(np.array([2.0]))[0]
    assert eps.real == pytest.approx(3.0, abs=1e-6) and 0 <= eps.imag < 1e-6


def test_eps2_positive_and_pure_function():
    law = Drude(1.0, 9.0, 0.05)
    energy = np.linspace(0.1, 10, 50)
    eps = law.epsilon_ev(energy)
    assert np.all(eps.imag > 0)
    np.testing.assert_allclose(eps, drude_epsilon(energy, 1.0, 9.0, 0.05))


def test_round_trip_and_invalid():
    law = from_toml({"law": "drude", "eps_inf": 3.8, "plasma_ev": {"value": 1.9, "vary": True},
                     "broadening_ev": 0.12}, "ito.material")
    assert from_toml(law.to_toml(), "x").params == law.params
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "drude", "plasma_ev": 1.0, "broadening_ev": -0.1}, "ito.material")
    assert err.value.where == "ito.material.broadening_ev"
