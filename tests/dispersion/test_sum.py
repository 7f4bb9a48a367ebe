"""The `sum` law: background plus term susceptibilities."""
import importlib.util
import pathlib

import numpy as np
import pytest

from lamina.dispersion import Drude, Lorentz, Sum, from_toml
from lamina.errors import LaminaInputError

_spec = importlib.util.spec_from_file_location("kk_helper", pathlib.Path(__file__).with_name("kk.py"))
kk = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(kk)

TABLE = {"law": "sum", "eps_inf": 3.6, "terms": [
    {"law": "drude", "plasma_ev": 1.9, "broadening_ev": 0.12},
    {"law": "lorentz", "oscillators": [{"amplitude": 0.8, "center_ev": 5.5, "broadening_ev": 0.5}]},
]}


def test_sum_is_background_plus_susceptibilities():
    law = from_toml(TABLE, "ito.material")
    energy = np.linspace(0.3, 6, 30)
    drude = Drude(1.0, 1.9, 0.12).epsilon_ev(energy) - 1.0
    lorentz = Lorentz(2.0, [{"amplitude": 0.8, "center_ev": 5.5, "broadening_ev": 0.5}]).epsilon_ev(energy) - 2.0
    np.testing.assert_allclose(law.epsilon_ev(energy), 3.6 + drude + lorentz, rtol=1e-12)


def test_names_mirror_the_model_file():
    law = from_toml(TABLE, "ito.material")
    assert list(law.params) == ["eps_inf", "terms.1.plasma_ev", "terms.1.broadening_ev",
                                "terms.2.oscillators.1.amplitude", "terms.2.oscillators.1.center_ev",
                                "terms.2.oscillators.1.broadening_ev"]
    assert law.specs["terms.1.plasma_ev"].unit == "eV"


def test_kramers_kronig_consistency():
    # sum of causal susceptibilities is causal (linearity of the KK transform; Wooten 1972)
    law = from_toml(TABLE, "ito.material")
    energy = np.linspace(0.3, 7.0, 20)
    numeric = kk.kk_eps1_minus_background(lambda e: law.epsilon_ev(e).imag, energy)
    np.testing.assert_allclose(numeric, law.epsilon_ev(energy).real - 3.6, atol=1e-3)


def test_batched_values_and_with_values_round_trip():
    law = from_toml(TABLE, "ito.material")
    energy = np.array([0.8, 2.0, 3.0])
    batch = law.epsilon_ev(energy, {"terms.1.plasma_ev": np.array([1.5, 1.9, 2.3])})
    assert batch.shape == (3, 3)
    np.testing.assert_allclose(batch[1], law.epsilon_ev(energy))
    moved = law.with_values({"terms.2.oscillators.1.center_ev": 6.0})
    np.testing.assert_allclose(moved.epsilon_ev(energy), law.epsilon_ev(energy, {"terms.2.oscillators.1.center_ev": 6.0}))
    table = moved.to_toml()
    assert table["terms"][1]["oscillators"][0]["center_ev"] == 6.0
    assert "eps_inf" not in table["terms"][0] and "eps_inf" not in table["terms"][1]
    again = from_toml(table, "ito.material")
    assert again.params == moved.params
    np.testing.assert_allclose(again.epsilon_ev(energy), moved.epsilon_ev(energy))


def test_tauc_lorentz_term_fits_in():
    # a colleague's law with a susceptibility hook is a valid term: chi = eps - eps_inf
    from lamina.dispersion import LAWS
    if "tauc_lorentz" not in LAWS:
        pytest.skip("tauc_lorentz law not available")
    tl = {"law": "tauc_lorentz", "gap_ev": 1.2,
          "oscillators": [{"amplitude_ev": 122.0, "center_ev": 3.45, "broadening_ev": 2.54}]}
    law = from_toml({"law": "sum", "eps_inf": 1.15, "terms": [tl]}, "m")
    alone = from_toml({**tl, "eps_inf": 1.15}, "m")
    energy = np.linspace(1.0, 5.0, 9)
    np.testing.assert_allclose(law.epsilon_ev(energy), alone.epsilon_ev(energy), rtol=1e-12)
    assert "terms.1.eps_inf" not in law.params


def test_invalid_terms():
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "sum", "terms": [{"law": "drude", "eps_inf": 2.0, "plasma_ev": 1, "broadening_ev": 0.1}]},
                  "m")
    assert err.value.where == "m.terms.1.eps_inf"
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "sum", "terms": [{"law": "cauchy", "A": 1.5}]}, "m")
    assert err.value.where == "m.terms.1" and "cauchy" in str(err.value)
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "sum", "terms": []}, "m")
    assert err.value.where == "m.terms"
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "sum", "terms": [{"law": "drude", "plasma_ev": 1, "broadening_ev": -1}]}, "m")
    assert err.value.where == "m.terms.1.broadening_ev"
    with pytest.raises(LaminaInputError):
        Sum(1.0, [])
