"""Cauchy and Sellmeier laws against published coefficients and their defining formulas."""
import math

import numpy as np
import pytest

from lamina.dispersion import Cauchy, Lorentz, Sellmeier, from_toml
from lamina.errors import LaminaInputError
from lamina.units import HC_EV_NM

# Malitson 1965 (J. Opt. Soc. Am. 55, 1205), fused silica, Sellmeier terms B_i and resonance
# wavelengths lambda_i (um) as published; C_um2 = lambda_i^2
MALITSON = [(0.6961663, 0.0684043), (0.4079426, 0.1162414), (0.8974794, 9.896161)]


def malitson_law():
    return Sellmeier([{"B": b, "C_um2": lam ** 2} for b, lam in MALITSON])


def test_malitson_fused_silica_at_the_helium_d_line():
    # Malitson 1965: n(587.56 nm) = 1.4585 (n_d of fused silica)
    n = malitson_law().nk(np.array([587.56]))[0]
    assert n.real == pytest.approx(1.4585, abs=1e-4)
    assert n.imag == 0


def test_malitson_against_direct_formula_in_wavelength():
    # n^2 = 1 + sum B lambda^2 / (lambda^2 - lambda_i^2), Malitson 1965, evaluated independently
    wl_um = np.array([0.25, 0.4, 0.6328, 1.0, 1.55, 3.0])
    n_direct = np.sqrt(1 + sum(b * wl_um ** 2 / (wl_um ** 2 - lam ** 2) for b, lam in MALITSON))
    np.testing.assert_allclose(malitson_law().nk(wl_um * 1000).real, n_direct, rtol=1e-12)


def test_sellmeier_term_is_an_undamped_lorentz_oscillator():
    # B lambda^2 / (lambda^2 - C) = B E0^2 / (E0^2 - E^2), E0 = hc / sqrt(C) (Born and Wolf 1999)
    sell = Sellmeier([{"B": 1.1, "C_um2": 0.01}])
    e0 = HC_EV_NM / 1000 / math.sqrt(0.01)
    lor = Lorentz(1.0, [{"amplitude": 1.1, "center_ev": e0, "broadening_ev": 0.0}])
    energy = np.linspace(0.5, 5, 10)
    np.testing.assert_allclose(sell.epsilon_ev(energy), lor.epsilon_ev(energy), rtol=1e-12)


def test_sellmeier_round_trip_names_and_bounds():
    law = from_toml({"law": "sellmeier", "terms": [{"B": 1.0, "C_um2": {"value": 0.01, "vary": True}},
                                                  {"B": 0.5, "C_um2": 100.0}]}, "sub.material")
    assert list(law.params) == ["terms.1.B", "terms.1.C_um2", "terms.2.B", "terms.2.C_um2"]
    assert from_toml(law.to_toml(), "x").params == law.params
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "sellmeier", "terms": [{"B": 1.0, "C_um2": -0.01}]}, "sub.material")
    assert err.value.where == "sub.material.terms.1.C_um2"


def test_cauchy_formula_in_micrometres():
    # n = A + B / lambda^2 + C / lambda^4, lambda in um (Jenkins and White 1976)
    law = Cauchy(1.45, 0.0036, 0.0001)
    wl_um = np.array([0.4, 0.5, 0.8])
    expected = 1.45 + 0.0036 / wl_um ** 2 + 0.0001 / wl_um ** 4
    np.testing.assert_allclose(law.nk(wl_um * 1000).real, expected, rtol=1e-12)
    assert np.all(law.nk(wl_um * 1000).imag == 0)


def test_cauchy_fits_malitson_in_the_visible():
    # A three-term Cauchy series describes fused silica in the visible to ~1e-4 (common practice):
    # fit A, B, C to Malitson 1965 by linear least squares in 1/lambda^2 (lambda in um), then the
    # law with those coefficients must reproduce Malitson's index
    wl = np.linspace(420, 720, 31)
    n_ref = malitson_law().nk(wl).real
    inv_sq = (1000.0 / wl) ** 2
    coeffs, *_ = np.linalg.lstsq(np.stack([np.ones_like(wl), inv_sq, inv_sq ** 2], axis=1), n_ref, rcond=None)
    law = Cauchy(*coeffs)
    np.testing.assert_allclose(law.nk(wl).real, n_ref, atol=1e-4)
    assert coeffs[0] == pytest.approx(1.45, abs=0.01)   # A near 1.45 for silica (from memory)


def test_urbach_tail():
    # k = k0 exp((E - E_edge) / E_u): k0 at the edge, falls by e per Urbach energy (Urbach 1953)
    law = Cauchy(2.0, 0.02, 0.0, k_amplitude=0.05, edge_ev=3.5, urbach_ev=0.25)
    energy = np.array([3.5, 3.25, 3.0])
    k = np.sqrt(law.epsilon_ev(energy)).imag
    np.testing.assert_allclose(k, 0.05 * np.exp([0.0, -1.0, -2.0]), rtol=1e-12)
    assert np.all(np.sqrt(Cauchy(2.0).epsilon_ev(energy)).imag == 0)   # off by default


def test_cauchy_round_trip_and_invalid():
    plain = from_toml({"law": "cauchy", "A": 1.46, "B_um2": 0.004}, "f.material")
    assert plain.to_toml() == {"law": "cauchy", "A": 1.46, "B_um2": 0.004}
    tail = from_toml({"law": "cauchy", "A": {"value": 1.9, "vary": True}, "B_um2": 0.01, "C_um4": 0.001,
                      "k_amplitude": 0.01, "edge_ev": 4.2, "urbach_ev": 0.3}, "f.material")
    assert from_toml(tail.to_toml(), "f.material").params == tail.params
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "cauchy", "A": 1.5, "B_um2": 0.0, "urbach_ev": 0.0}, "f.material")
    assert err.value.where == "f.material.urbach_ev"
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "cauchy", "B_um2": 0.0}, "f.material")
    assert "'A'" in str(err.value)
