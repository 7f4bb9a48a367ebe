"""Every dispersion law in a model file: parses, round-trips through save_model/load_model, simulates.

The numbers are plausible film values chosen for the test (not fitted to anything);
what is checked is that writing and reading a model keeps every law exactly, and that
the reloaded model gives the same spectra.
"""
from __future__ import annotations

import textwrap

import numpy as np
import pytest

import lamina
from lamina.dispersion import LAWS
from lamina.stack.modelfile import load_model, save_model

# one [layers.material] body per law; "free" parameters are tables so vary flags round-trip too
LAW_EXAMPLES = {
    "constant": 'law = "constant"\nn = { value = 2.0, min = 1.5, max = 2.5 }\nk = 0.01\n',
    "cauchy": 'law = "cauchy"\nA = { value = 1.98, min = 1.5, max = 2.5 }\nB_um2 = 0.018\nC_um4 = 0.0004\n',
    # fused silica: I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965), C as squared resonance wavelengths
    "sellmeier": ('law = "sellmeier"\nterms = [{ B = 0.6961663, C_um2 = 0.004679148 }, '
                  '{ B = 0.4079426, C_um2 = 0.01351206 }, { B = 0.8974794, C_um2 = 97.934 }]\n'),
    "lorentz": ('law = "lorentz"\neps_inf = 1.2\n[[layers.material.oscillators]]\n'
                'amplitude = { value = 2.5, min = 0.1, max = 5.0 }\ncenter_ev = 6.0\n'
                'broadening_ev = { value = 0.8, min = 0.05, max = 3.0, vary = false }\n'),
    "drude": 'law = "drude"\neps_inf = 3.8\nplasma_ev = { value = 1.9, min = 0.5, max = 4.0 }\nbroadening_ev = 0.12\n',
    "tauc_lorentz": ('law = "tauc_lorentz"\neps_inf = 1.1\ngap_ev = { value = 1.6, min = 1.0, max = 2.0 }\n'
                     'oscillators = [{ amplitude_ev = 120.0, center_ev = 3.6, broadening_ev = 2.3 }]\n'),
    "cody_lorentz": ('law = "cody_lorentz"\neps_inf = 1.0\namplitude_ev = 110.0\ncenter_ev = 3.7\n'
                     'broadening_ev = 2.4\ngap_ev = { value = 1.7, min = 1.0, max = 2.2 }\ntransition_ev = 1.0\n'),
    "gaussian": ('law = "gaussian"\neps_inf = 2.0\n'
                 'oscillators = [{ amplitude = 1.5, center_ev = 6.5, broadening_ev = { value = 1.0, min = 0.1, max = 3.0 } }]\n'),
    "sum": ('law = "sum"\neps_inf = 3.6\nterms = [{ law = "drude", plasma_ev = 1.9, broadening_ev = 0.12 }, '
            '{ law = "lorentz", oscillators = [{ amplitude = 0.5, center_ev = 5.5, broadening_ev = 0.6 }] }]\n'),
    "table": 'law = "table"\nfile = "nk/film.csv"\n',
    "bruggeman": ('law = "bruggeman"\ncomponents = [{ material = { law = "constant", n = 1.46 } }, '
                  '{ material = "void" }]\nfractions = [{ value = 0.7, min = 0.0, max = 1.0 }]\n'),
    "maxwell_garnett": ('law = "maxwell_garnett"\ncomponents = [{ material = "void" }, '
                        '{ material = { law = "constant", n = 1.46 } }]\nfractions = [0.2]\n'),
}

NK_CSV = "wavelength_nm,n,k\n250,2.3,0.2\n500,2.1,0.05\n750,2.05,0.01\n1100,2.0,0.0\n"


def model_text(body: str) -> str:
    return textwrap.dedent("""\
        name = "one law"
        [[layers]]
        name = "film"
        thickness_nm = { value = 80.0, min = 0.0, max = 300.0 }
        [layers.material]
        """) + body + '\n[substrate]\nmaterial = { law = "constant", n = 3.882, k = 0.019 }\n'


def test_every_registered_law_has_an_example():
    assert set(LAWS) <= set(LAW_EXAMPLES), sorted(set(LAWS) - set(LAW_EXAMPLES))


@pytest.mark.parametrize("law", sorted(LAW_EXAMPLES))
def test_law_parses_round_trips_and_simulates(tmp_path, law):
    if law not in LAWS:
        pytest.skip(f"law '{law}' is not registered in this build")
    (tmp_path / "nk").mkdir()
    (tmp_path / "nk" / "film.csv").write_text(NK_CSV, encoding="utf-8")
    path = tmp_path / "model.toml"
    path.write_text(model_text(LAW_EXAMPLES[law]), encoding="utf-8")
    stack = load_model(path)
    assert stack.layers[0].material.law == law

    # save into another folder: a relative data file must still be found from there
    (tmp_path / "elsewhere").mkdir()
    saved = save_model(stack, tmp_path / "elsewhere" / "again.toml")
    again = load_model(saved)
    assert again.parameters() == stack.parameters()
    assert again.to_toml() == load_model(saved).to_toml()

    wavelength = np.linspace(300.0, 1000.0, 15)
    angle = np.array([0.0, 70.0])
    first = lamina.simulate(stack, wavelength_nm=wavelength, angle_deg=angle)
    second = lamina.simulate(again, wavelength_nm=wavelength, angle_deg=angle)
    for name in ("psi", "delta", "R", "T"):
        assert np.all(np.isfinite(first[name].values)), name
        np.testing.assert_allclose(second[name].values, first[name].values, rtol=1e-12, atol=1e-12)


def test_free_law_parameters_get_full_dotted_names(tmp_path):
    if "lorentz" not in LAWS:
        pytest.skip("lorentz law not registered")
    path = tmp_path / "model.toml"
    path.write_text(model_text(LAW_EXAMPLES["lorentz"]), encoding="utf-8")
    stack = load_model(path)
    free = stack.free_parameters()
    assert "film.material.oscillators.1.amplitude" in free
    assert "film.material.oscillators.1.broadening_ev" not in free  # vary = false
    assert stack.parameters()["film.material.oscillators.1.center_ev"].value == 6.0


def test_bad_oscillator_value_names_the_nested_key(tmp_path):
    if "lorentz" not in LAWS:
        pytest.skip("lorentz law not registered")
    body = LAW_EXAMPLES["lorentz"].replace("min = 0.05, max = 3.0", "min = 1.0, max = 3.0")
    path = tmp_path / "model.toml"
    path.write_text(model_text(body), encoding="utf-8")
    with pytest.raises(lamina.LaminaInputError) as info:
        load_model(path)
    message = str(info.value)
    assert message.startswith(f"{path}: layers[1].material.oscillators"), message
    assert "broadening_ev" in message
