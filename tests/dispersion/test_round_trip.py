"""from_toml / to_toml round trip of every law of this area, through real TOML text."""
import tomllib

import numpy as np
import pytest
import tomli_w

from lamina.dispersion import from_toml

P = {"value": 1.2, "min": 0.5, "max": 3.0}   # a free parameter with fit bounds

TABLES = {
    "cauchy": {"law": "cauchy", "A": {"value": 1.46, "vary": True}, "B_um2": 0.0038, "C_um4": 1e-5,
               "k_amplitude": 0.002, "edge_ev": 4.5, "urbach_ev": 0.3},
    "sellmeier": {"law": "sellmeier", "terms": [{"B": P, "C_um2": 0.0047}, {"B": 0.9, "C_um2": 97.9}]},
    "lorentz": {"law": "lorentz", "eps_inf": 1.5,
                "oscillators": [{"amplitude": P, "center_ev": 4.0, "broadening_ev": {"value": 0.3, "vary": False}}]},
    "drude": {"law": "drude", "eps_inf": 1.0, "plasma_ev": {"value": 9.0, "min": 5.0}, "broadening_ev": 0.05},
    "sum": {"law": "sum", "eps_inf": 3.6, "terms": [
        {"law": "drude", "plasma_ev": 1.9, "broadening_ev": {"value": 0.12, "vary": True}},
        {"law": "lorentz", "oscillators": [{"amplitude": 0.8, "center_ev": 5.5, "broadening_ev": 0.5}]},
        {"law": "sellmeier", "terms": [{"B": 0.1, "C_um2": 0.01}]}]},
    "table": {"law": "table", "wavelength_nm": [400.0, 500.0, 900.0], "n": [1.5, 1.45, 1.44], "k": [0.01, 0.0, 0.0]},
    "bruggeman": {"law": "bruggeman", "components": [
        {"material": {"law": "lorentz", "eps_inf": 1.0,
                      "oscillators": [{"amplitude": 1.1, "center_ev": 10.0, "broadening_ev": 0.1}]}},
        {"material": {"law": "constant", "n": 1.0, "k": 0.0}},
        {"material": {"law": "drude", "eps_inf": 1.0, "plasma_ev": 8.0, "broadening_ev": 0.1}}],
        "fractions": [{"value": 0.6, "vary": True}, 0.1]},
    "maxwell_garnett": {"law": "maxwell_garnett", "components": [
        {"material": {"law": "drude", "eps_inf": 1.0, "plasma_ev": 8.0, "broadening_ev": 0.1}},
        {"material": {"law": "cauchy", "A": 1.5, "B_um2": 0.004}}],
        "fractions": [0.05]},
}


@pytest.mark.parametrize("law", sorted(TABLES))
def test_round_trip_through_toml_text(law):
    original = from_toml(TABLES[law], "film.material")
    assert original.law == law
    text = tomli_w.dumps({"material": original.to_toml()})
    again = from_toml(tomllib.loads(text)["material"], "film.material")
    assert again.params == original.params
    assert again.to_toml() == original.to_toml()
    wl = np.array([450.0, 600.0, 850.0])
    np.testing.assert_allclose(again.epsilon(wl), original.epsilon(wl), rtol=1e-14)


@pytest.mark.parametrize("law", sorted(set(TABLES) - {"table"}))   # the table law has no parameters
def test_with_values_survives_the_round_trip(law):
    original = from_toml(TABLES[law], "film.material")
    key = next(iter(original.params))
    spec = original.specs[key]
    value = original.params[key].value
    new_value = min(value * 1.01 + 0.001, spec.upper, original.params[key].max)
    moved = original.with_values({key: new_value})
    again = from_toml(tomllib.loads(tomli_w.dumps({"m": moved.to_toml()}))["m"], "film.material")
    assert again.params[key].value == pytest.approx(new_value)
    wl = np.array([450.0, 600.0])
    np.testing.assert_allclose(again.epsilon(wl), moved.epsilon(wl), rtol=1e-12)
