"""Every Kramers-Kronig consistent law: eps1 is the causal partner of eps2.

    eps1(E) - eps1(inf) = (2 / pi) P int_0^inf E' eps2(E') / (E'^2 - E^2) dE'

(Kramers-Kronig relation for exp(-i omega t); F. Wooten, Optical Properties of
Solids, 1972, sec. 6.2.)  The right side is computed by QUADPACK's Cauchy-weighted
rule in tests/dispersion/kk.py, independently of each law's own eps1 (closed
form, Dawson function or its own numerical transform).  Tolerance 1e-3, as
required of the laws.

The parameter sets are invented for the demo scenario (Larkspur Optics pilot
line films), except the a-Si Tauc-Lorentz set (Jellison and Modine 1996, from
memory).
"""
import importlib.util
import pathlib

import numpy as np
import pytest

from lamina.dispersion import LAWS, from_toml

_spec = importlib.util.spec_from_file_location("kk_helper", pathlib.Path(__file__).with_name("kk.py"))
kk = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(kk)

#: laws that are not checked here, and why; a newly registered law must be put in one group
NOT_CHECKED = {
    "constant": "a constant k > 0 has no causal partner (common practice)",
    "cauchy": "an empirical series for the transparent region, not a response function",
    "sellmeier": "lossless poles: eps2 is a sum of delta functions, outside a numerical integral",
    "table": "tabulated data, consistent only as far as its source is",
}

TL_A_SI = {"law": "tauc_lorentz", "eps_inf": 1.15, "gap_ev": 1.20,
           "oscillators": [{"amplitude_ev": 122.0, "center_ev": 3.45, "broadening_ev": 2.54}]}
TL_NITRIDE = {"law": "tauc_lorentz", "eps_inf": 2.1, "gap_ev": 4.6,
              "oscillators": [{"amplitude_ev": 60.0, "center_ev": 8.0, "broadening_ev": 1.5},
                              {"amplitude_ev": 20.0, "center_ev": 10.0, "broadening_ev": 3.0}]}
CL_ABSORBER = {"law": "cody_lorentz", "eps_inf": 1.0, "amplitude_ev": 100.0, "center_ev": 3.6,
               "broadening_ev": 2.4, "gap_ev": 1.65, "transition_ev": 1.0, "tail_onset_ev": 1.8,
               "urbach_ev": 0.05}
GAUSS_BANDS = {"law": "gaussian", "eps_inf": 2.0,
               "oscillators": [{"amplitude": 1.2, "center_ev": 4.0, "broadening_ev": 1.0},
                               {"amplitude": 0.3, "center_ev": 1.5, "broadening_ev": 0.4}]}
LORENTZ = {"law": "lorentz", "eps_inf": 1.8,
           "oscillators": [{"amplitude": 1.5, "center_ev": 5.0, "broadening_ev": 0.8},
                           {"amplitude": 0.4, "center_ev": 9.0, "broadening_ev": 2.0}]}
DRUDE = {"law": "drude", "eps_inf": 3.8, "plasma_ev": 2.0, "broadening_ev": 0.15}
VOID = {"law": "constant", "n": 1.0}


def _without_background(table):
    return {k: v for k, v in table.items() if k != "eps_inf"}


#: name -> (model-file table, energies (eV), kinks of eps2 (eV))
CASES = {
    "lorentz": (LORENTZ, [0.3, 2.0, 4.6, 5.0, 5.5, 8.0], []),
    "drude": (DRUDE, [0.1, 0.5, 1.0, 2.0, 4.0], []),
    "tauc_lorentz": (TL_A_SI, [0.6, 1.0, 1.3, 2.0, 3.45, 5.0, 8.0], [1.20]),
    "tauc_lorentz (two oscillators, wide gap)": (TL_NITRIDE, [1.5, 4.0, 4.7, 6.0, 8.0], [4.6]),
    "cody_lorentz": (CL_ABSORBER, [0.6, 1.7, 1.81, 2.5, 3.6], [1.65, 1.8]),
    "cody_lorentz (no tail)": ({**CL_ABSORBER, "tail_onset_ev": 0.0}, [1.6, 1.7, 2.5, 6.0], [1.65]),
    "gaussian": (GAUSS_BANDS, [0.3, 1.5, 2.5, 4.0, 4.4, 7.0], []),
    "sum": ({"law": "sum", "eps_inf": 1.5,
             "terms": [_without_background(TL_A_SI), _without_background(GAUSS_BANDS),
                       _without_background(LORENTZ), _without_background(DRUDE),
                       _without_background(CL_ABSORBER)]},
            [0.4, 1.5, 2.0, 3.5], [1.2, 1.65, 1.8]),
    "bruggeman": ({"law": "bruggeman", "components": [{"material": TL_A_SI}, {"material": VOID}],
                   "fractions": [0.6]}, [0.8, 1.5, 2.5, 3.5, 5.0], [1.2]),
    "maxwell_garnett": ({"law": "maxwell_garnett", "components": [{"material": GAUSS_BANDS},
                                                                  {"material": LORENTZ}],
                         "fractions": [0.2]}, [0.5, 1.5, 3.0, 4.0, 6.0], []),
}


def _resolve(raw, where):
    return from_toml(raw, where, _resolve)


def test_every_registered_law_is_checked_or_excused():
    checked = {table["law"] for table, _, _ in CASES.values()}
    unclassified = set(LAWS) - checked - set(NOT_CHECKED)
    assert not unclassified, f"add a Kramers-Kronig case (or a reason not to) for {sorted(unclassified)}"


@pytest.mark.parametrize("name", sorted(CASES))
def test_eps1_is_the_kramers_kronig_transform_of_eps2(name):
    table, energies, kinks = CASES[name]
    if table["law"] not in LAWS:
        pytest.skip(f"law '{table['law']}' not registered")
    law = from_toml(table, "film.material", _resolve)
    energy = np.array(energies, dtype=float)
    closed = law.epsilon_ev(energy).real
    # eps1(inf): the law's value at 10 keV (every law here reaches its limit to < 1e-5 there)
    background = law.epsilon_ev(np.array([1e4])).real[0]
    if "eps_inf" in law.params:
        assert background == pytest.approx(law.params["eps_inf"].value, abs=1e-5)
    numeric = kk.kk_eps1_minus_background(lambda e: law.epsilon_ev(e).imag, energy,
                                          breakpoints_ev=kinks, limit=1000)
    np.testing.assert_allclose(closed - background, numeric, atol=1e-3)
