"""Cody-Lorentz law (Ferlauto et al., J. Appl. Phys. 92, 2424 (2002)) with a numerical eps1."""
import importlib.util
import math
import pathlib

import numpy as np
import pytest

from lamina.dispersion import LAWS, from_toml
from lamina.dispersion.cody_lorentz import CodyLorentz, cody_lorentz_eps2, kramers_kronig_eps1
from lamina.errors import LaminaInputError

_spec = importlib.util.spec_from_file_location("kk_helper", pathlib.Path(__file__).with_name("kk.py"))
kk = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(kk)

# an invented a-Si:H-like film for the Larkspur Optics pilot line (demo values, not a measurement)
FILM = dict(eps_inf=1.0, amplitude_ev=100.0, center_ev=3.6, broadening_ev=2.4, gap_ev=1.65,
            transition_ev=1.0, tail_onset_ev=1.8, urbach_ev=0.05)
ARGS = tuple(FILM[k] for k in CodyLorentz.ARGUMENTS)


def eps2_by_hand(energy, a, e0, gamma, eg, ep, et, eu):
    """Ferlauto et al. 2002: eps2 = G(E) L(E) above Et, (E1 / E) exp((E - Et) / Eu) below,
    E1 = Et G(Et) L(Et); G = (E - Eg)^2 / ((E - Eg)^2 + Ep^2), L = A E0 Gamma E / ((E^2 - E0^2)^2
    + Gamma^2 E^2); written out for one scalar energy."""
    def band(x):
        if x <= eg:
            return 0.0
        g = (x - eg) ** 2 / ((x - eg) ** 2 + ep ** 2)
        return g * a * e0 * gamma * x / ((x ** 2 - e0 ** 2) ** 2 + gamma ** 2 * x ** 2)
    if energy > et:
        return band(energy)
    if et == 0:
        return 0.0
    return et * band(et) / energy * math.exp((energy - et) / eu)


def test_registered():
    assert LAWS["cody_lorentz"] is CodyLorentz


@pytest.mark.parametrize("energy", [0.8, 1.5, 1.7, 1.8, 1.81, 2.5, 3.6, 6.0])
def test_eps2_matches_published_formula_by_hand(energy):
    law = CodyLorentz(**FILM)
    assert law.epsilon_ev(np.array([energy])).imag[0] == pytest.approx(eps2_by_hand(energy, *ARGS), rel=1e-12)


def test_eps2_is_continuous_at_the_tail_onset_and_the_tail_is_exponential():
    # Ferlauto et al. 2002: E1 is chosen so that eps2 is continuous at Et
    et = FILM["tail_onset_ev"]
    law = CodyLorentz(**FILM)
    below, at, above = law.epsilon_ev(np.array([et - 1e-9, et, et + 1e-9])).imag
    assert below == pytest.approx(at, rel=1e-6) and above == pytest.approx(at, rel=1e-6)
    # below Et: d ln(E eps2) / dE = 1 / Eu (the Urbach slope)
    energy = np.array([1.5, 1.6])
    e_eps2 = energy * law.epsilon_ev(energy).imag
    assert np.diff(np.log(e_eps2))[0] / 0.1 == pytest.approx(1.0 / FILM["urbach_ev"], rel=1e-9)


def test_without_tail_eps2_is_zero_up_to_the_gap_and_grows_like_the_cody_form():
    law = CodyLorentz(**{**FILM, "tail_onset_ev": 0.0})
    assert np.all(law.epsilon_ev(np.array([0.3, 1.0, 1.65])).imag == 0.0)
    # just above Eg: eps2 ~ (E - Eg)^2 L(Eg) / Ep^2 (Ferlauto et al. 2002, the Cody onset)
    e1, e2 = 1.65 + 1e-3, 1.65 + 2e-3
    ratio = law.epsilon_ev(np.array([e2])).imag[0] / law.epsilon_ev(np.array([e1])).imag[0]
    assert ratio == pytest.approx(4.0, rel=2e-3)


def test_eps2_takes_the_lorentz_shape_far_above_the_gap():
    # G -> 1 when E - Eg >> Ep: eps2 -> L(E) (Ferlauto et al. 2002)
    law = CodyLorentz(**{**FILM, "transition_ev": 0.05})
    energy = np.array([4.0, 6.0, 9.0])
    a, e0, g = FILM["amplitude_ev"], FILM["center_ev"], FILM["broadening_ev"]
    lorentz = a * e0 * g * energy / ((energy ** 2 - e0 ** 2) ** 2 + g ** 2 * energy ** 2)
    np.testing.assert_allclose(law.epsilon_ev(energy).imag, lorentz, rtol=2e-3)


@pytest.mark.parametrize("args", [
    ARGS,                                         # the demo film, tail on
    (100.0, 3.6, 2.4, 1.65, 1.0, 1.8037, 0.05),   # tail onset off the integration grid
    (80.0, 4.0, 1.0, 1.2, 0.5, 0.0, 0.05),        # no tail, narrower oscillator (eps2 peak ~ 80)
    (60.0, 3.0, 0.3, 2.0, 0.2, 2.05, 0.01),       # sharp peak and a steep tail
    (150.0, 8.0, 3.0, 4.5, 1.5, 4.6, 0.1),        # nitride-like wide gap (invented)
])
def test_numerical_eps1_matches_an_adaptive_kramers_kronig_quadrature(args):
    # the reference is QUADPACK's Cauchy-weighted rule (tests/dispersion/kk.py), split at the kinks
    gap, center, onset = args[3], args[1], args[5]
    energy = np.array([0.5, gap - 0.01, gap + 0.003, onset + 0.0013 if onset else 2.2, center - 0.1,
                       center + 0.2, 7.0])
    numeric = kramers_kronig_eps1(energy, *args)
    reference = kk.kk_eps1_minus_background(lambda e: cody_lorentz_eps2(e, *args), energy,
                                            breakpoints_ev=[b for b in (gap, onset, center) if b > 0],
                                            limit=1000)
    np.testing.assert_allclose(numeric, reference, atol=3e-4)


def test_batch_equals_loop_of_single_evaluations():
    law = CodyLorentz(**FILM)
    energy = np.linspace(0.7, 6.5, 61)
    onsets = np.array([1.7, 1.8, 2.05])
    widths = np.array([1.5, 2.4, 3.0])
    batch = law.epsilon_ev(energy, {"tail_onset_ev": onsets, "broadening_ev": widths})
    assert batch.shape == (3, 61)
    for i in range(3):
        single = law.with_values({"tail_onset_ev": onsets[i], "broadening_ev": widths[i]}).epsilon_ev(energy)
        # same integration grid here, so only round-off differs (a matrix product vs a vector one)
        np.testing.assert_allclose(batch[i], single, rtol=1e-9, atol=1e-8)
    # a batch over parameters that do not move the kink of eps2
    amplitudes = np.array([60.0, 100.0])
    batch = law.epsilon_ev(energy, {"amplitude_ev": amplitudes})
    for i in range(2):
        single = law.with_values({"amplitude_ev": amplitudes[i]}).epsilon_ev(energy)
        np.testing.assert_allclose(batch[i], single, rtol=1e-9, atol=1e-8)


def test_finite_everywhere_including_the_special_energies():
    law = CodyLorentz(**FILM)
    energy = np.array([1e-6, 0.01, 1.65, 1.8, 3.6, 30.0])
    assert np.all(np.isfinite(law.epsilon_ev(energy)))
    assert np.all(law.epsilon_ev(energy).imag >= 0)


def test_a_si_like_film_has_plausible_index():
    # a-Si:H: n ~ 4-4.5, k ~ 0.2-0.8 near 2 eV (common practice)
    nk = CodyLorentz(**{**FILM, "eps_inf": 1.2}).nk(np.array([1239.841984 / 2.0]))[0]
    assert 3.5 < nk.real < 5.0
    assert 0.1 < nk.imag < 1.0


def test_toml_round_trip_and_defaults():
    table = {"law": "cody_lorentz", "eps_inf": 1.0, "amplitude_ev": {"value": 90.0, "min": 50.0, "max": 150.0},
             "center_ev": 3.6, "broadening_ev": 2.4, "gap_ev": 1.6, "transition_ev": 1.0}
    law = from_toml(table, "absorber.material")
    assert law.params["tail_onset_ev"].value == 0.0
    assert law.params["amplitude_ev"].vary
    again = from_toml(law.to_toml(), "absorber.material")
    assert again.to_toml() == law.to_toml()


@pytest.mark.parametrize("change, named", [
    ({"broadening_ev": 0.0}, "broadening_ev"),
    ({"transition_ev": -1.0}, "transition_ev"),
    ({"amplitude_ev": -3.0}, "amplitude_ev"),
    ({"gap_ev": -0.5}, "gap_ev"),
    ({"urbach_ev": 0.0}, "urbach_ev"),
    ({"tail_onset_ev": 1.2}, "tail_onset_ev"),      # 0 < Et < Eg
    ({"center_ev": 0.0}, "center_ev"),
])
def test_invalid_parameters_raise_one_clear_error(change, named):
    table = {"law": "cody_lorentz", **FILM, **change}
    with pytest.raises(LaminaInputError) as err:
        from_toml(table, "absorber.material")
    assert err.value.where == f"absorber.material.{named}"


def test_tail_without_urbach_energy_is_refused():
    table = {"law": "cody_lorentz", **FILM}
    del table["urbach_ev"]
    with pytest.raises(LaminaInputError, match="urbach_ev"):
        from_toml(table, "absorber.material")
