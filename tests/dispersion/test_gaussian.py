"""Gaussian oscillators with a Dawson-function eps1 (De Sousa Meneses et al. 2006, J. Non-Cryst.
Solids 352, 769, citation from memory; eps1 derived from the Hilbert transform of exp(-x^2))."""
import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq, minimize_scalar

from lamina.dispersion import LAWS, from_toml
from lamina.dispersion.gaussian import Gaussian, gaussian_susceptibility
from lamina.errors import LaminaInputError

BAND = {"amplitude": 2.0, "center_ev": 3.0, "broadening_ev": 0.8}


def eps2_by_hand(energy, a, e0, fwhm):
    """eps2 of one band, written out: sigma = FWHM / (2 sqrt(ln 2)) (the Gaussian half-width
    relation, common practice)."""
    sigma = fwhm / (2 * math.sqrt(math.log(2)))
    return a * (math.exp(-((energy - e0) / sigma) ** 2) - math.exp(-((energy + e0) / sigma) ** 2))


def eps1_by_quadrature(energy, a, e0, fwhm):
    """(2/pi) P int_0^inf E' eps2(E') / (E'^2 - E^2) dE' (Kramers-Kronig relation, e.g. Jellison
    and Modine 1996), by scipy's Cauchy-weight quadrature (QUADPACK QAWC)."""
    f = lambda x: x * eps2_by_hand(x, a, e0, fwhm) / (x + energy)
    total = quad(f, 0.0, 2 * energy, weight="cauchy", wvar=energy, limit=400)[0]
    total += quad(lambda x: f(x) / (x - energy), 2 * energy, np.inf, limit=400)[0]
    return 2 / math.pi * total


def test_registered():
    assert LAWS["gaussian"] is Gaussian


@pytest.mark.parametrize("band", [(2.0, 3.0, 0.8), (0.5, 0.3, 0.6), (5.0, 9.0, 3.0)])
def test_dawson_eps1_matches_kramers_kronig_quadrature(band):
    # this fixes the sign and the 2 / sqrt(pi) factor of the Dawson form
    energies = np.array([0.05, 0.4, band[1] - 0.2, band[1], band[1] + 0.3, 6.0, 12.0])
    closed = gaussian_susceptibility(energies, *band).real
    numeric = [eps1_by_quadrature(e, *band) for e in energies]
    np.testing.assert_allclose(closed, numeric, atol=1e-7, rtol=1e-7)


def test_eps2_matches_formula_by_hand():
    energy = np.array([0.5, 2.7, 3.0, 3.9])
    eps = Gaussian(1.5, [BAND]).epsilon_ev(energy)
    np.testing.assert_allclose(eps.imag, [eps2_by_hand(e, 2.0, 3.0, 0.8) for e in energy], rtol=1e-13)


def test_eps2_is_odd_in_energy_and_zero_at_zero():
    # a real response function has eps2(-E) = -eps2(E) and eps1(-E) = eps1(E) (common practice)
    energy = np.linspace(0.1, 7.0, 30)
    plus = gaussian_susceptibility(energy, 2.0, 1.0, 1.5)
    minus = gaussian_susceptibility(-energy, 2.0, 1.0, 1.5)
    np.testing.assert_allclose(minus.imag, -plus.imag, atol=1e-15)
    np.testing.assert_allclose(minus.real, plus.real, atol=1e-14)
    assert gaussian_susceptibility(0.0, 2.0, 1.0, 1.5).imag == 0.0
    assert np.all(plus.imag >= 0)


def test_peak_at_center_and_fwhm_equals_broadening():
    # a band far from E = 0 (E0 >> Br) so that the mirror term is negligible
    law = Gaussian(1.0, [{"amplitude": 3.0, "center_ev": 5.0, "broadening_ev": 0.6}])
    eps2 = lambda e: float(law.epsilon_ev(np.array([e])).imag[0])
    peak = minimize_scalar(lambda e: -eps2(e), bounds=(4.0, 6.0), method="bounded",
                           options={"xatol": 1e-9}).x
    assert peak == pytest.approx(5.0, abs=1e-6)
    assert eps2(peak) == pytest.approx(3.0, rel=1e-9)
    half = 0.5 * eps2(peak)
    low = brentq(lambda e: eps2(e) - half, 4.0, 5.0, xtol=1e-12)
    high = brentq(lambda e: eps2(e) - half, 5.0, 6.0, xtol=1e-12)
    assert high - low == pytest.approx(0.6, rel=1e-9)


def test_batch_equals_loop_of_single_evaluations():
    law = Gaussian(1.2, [BAND, {"amplitude": 0.7, "center_ev": 5.5, "broadening_ev": 1.5}])
    energy = np.linspace(0.5, 7.0, 41)
    widths = np.array([0.3, 0.8, 2.0, 4.0])
    amps = np.array([0.0, 1.0, 2.0, 3.0])
    batch = law.epsilon_ev(energy, {"oscillators.1.broadening_ev": widths, "oscillators.2.amplitude": amps})
    assert batch.shape == (4, 41)
    for i in range(4):
        single = law.with_values({"oscillators.1.broadening_ev": widths[i],
                                  "oscillators.2.amplitude": amps[i]}).epsilon_ev(energy)
        np.testing.assert_allclose(batch[i], single, rtol=1e-13, atol=1e-14)


def test_toml_round_trip():
    table = {"law": "gaussian", "eps_inf": 2.1,
             "oscillators": [{"amplitude": {"value": 1.0, "min": 0.0, "max": 5.0}, "center_ev": 4.2,
                              "broadening_ev": 1.1}]}
    law = from_toml(table, "coat.material")
    assert law.params["oscillators.1.amplitude"].vary
    again = from_toml(law.to_toml(), "coat.material")
    assert again.to_toml() == law.to_toml()


@pytest.mark.parametrize("change, named", [
    ({"broadening_ev": 0.0}, "broadening_ev"),
    ({"broadening_ev": -0.2}, "broadening_ev"),
    ({"amplitude": -1.0}, "amplitude"),
    ({"center_ev": -3.0}, "center_ev"),
    ({"center_ev": "3"}, "center_ev"),
])
def test_invalid_parameters_raise_one_clear_error(change, named):
    table = {"law": "gaussian", "eps_inf": 1.0, "oscillators": [{**BAND, **change}]}
    with pytest.raises(LaminaInputError) as err:
        from_toml(table, "coat.material")
    assert err.value.where == f"coat.material.oscillators.1.{named}"
