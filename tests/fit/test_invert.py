"""Point-by-point inversion of n, k against tmm-made data of a known Lorentz film."""
import numpy as np
import pytest

from lamina.dispersion import Constant
from lamina.errors import LaminaInputError
from lamina.fit.invert import invert, kramers_kronig_check, oscillator_sum
from lamina.stack import Layer, Stack

SI = 3.882 + 0.019j          # convention anchor of DEVELOPERS.md (from memory, ~Green 2008)
TRUTH = {"eps_inf": 2.0, "amplitude": 1.0, "center_ev": 3.5, "broadening_ev": 0.8}
THICKNESS_NM = 60.0
WAVELENGTHS = np.linspace(300, 1000, 36)


@pytest.fixture(scope="module")
def film_data(tmm_data):
    return tmm_data.ellipsometry([lambda w: np.ones_like(w), lambda w: tmm_data.lorentz_index(w, **TRUTH),
                                  lambda w: np.full_like(w, SI, dtype=complex)], [THICKNESS_NM], (65.0, 70.0, 75.0),
                                 WAVELENGTHS, sigma_psi=0.02, sigma_delta=0.05, rng=np.random.default_rng(1))


def stack(thickness_nm=THICKNESS_NM, start=(1.8, 0.1)):
    return Stack([Layer("film", Constant(*start), thickness_nm)], Constant(SI.real, SI.imag))


def test_recovers_lorentz_n_k_within_errors(film_data, tmm_data):
    result = invert(stack(), film_data, "film")
    truth = tmm_data.lorentz_index(WAVELENGTHS, **TRUTH)
    assert result.success
    z_n = (result.n - truth.real) / result.n_err
    z_k = (result.k - truth.imag) / result.k_err
    # 36 wavelengths: every |z| < 4 and roughly normal spread (coverage of +-1 sigma about 68 %)
    assert np.all(np.abs(z_n) < 4) and np.all(np.abs(z_k) < 4)
    assert 0.45 < np.mean(np.abs(z_n) < 1) < 0.9
    assert np.all(result.n_err < 0.01) and np.all(result.k_err < 0.01)
    assert result.kk["consistent"] is True
    assert result.kk["rms_n"] < 0.005 and result.kk["rms_k"] < 0.005


def test_wrong_fixed_thickness_fails_the_kramers_kronig_check(film_data):
    # with a wrong thickness the inverted n, k absorb the error and lose causality
    result = invert(stack(thickness_nm=50.0), film_data, "film")
    assert result.kk["consistent"] is False
    assert any("Kramers-Kronig" in w for w in result.warnings)


def test_continuation_from_neighbours_rescues_a_poor_start(film_data, tmm_data):
    # a start far from the truth in the absorption band; neighbours carry the solution over
    result = invert(stack(start=(3.0, 0.0)), film_data, "film")
    truth = tmm_data.lorentz_index(WAVELENGTHS, **TRUTH)
    assert np.max(np.abs(result.n - truth.real)) < 0.01
    assert np.max(np.abs(result.k - truth.imag)) < 0.01


def test_kk_check_accepts_a_causal_table_and_rejects_an_acausal_one():
    # a two-oscillator Lorentz table is causal by construction (Fox 2010, sec. 2.2);
    # n held constant while k has a peak violates Kramers-Kronig (Wooten 1972, sec. 6.4)
    wl = np.linspace(250, 1000, 60)
    energy = 1239.841984 / wl
    N = np.sqrt(oscillator_sum(energy, 1.8, np.array([0.6, 1.2]), np.array([3.2, 7.0]), np.array([0.5, 1.5])))
    err = np.full(wl.size, 1e-3)
    good = kramers_kronig_check(wl, N.real, N.imag, err, err)
    assert good["consistent"] is True
    bad = kramers_kronig_check(wl, np.full(wl.size, N.real.mean()), N.imag, err, err)
    assert bad["consistent"] is False


def test_unknown_layer_is_an_input_error(film_data):
    with pytest.raises(LaminaInputError, match="no layer 'oxide'"):
        invert(stack(), film_data, "oxide")


def test_continuity_decides_between_equally_good_solutions():
    # two solutions with the same chi-square at wavelength 2: the one continuous with its neighbours wins;
    # a clearly better one wins even when it is rough (common practice of point-by-point inversion)
    from lamina.fit.invert import _accept
    n = np.array([1.50, 1.51, 1.90, 1.53, 1.54])
    k = np.zeros(5)
    chi2 = np.array([2.0, 2.0, 2.0, 2.0, 2.0])
    smooth = (np.array([1.50, 1.51, 1.52, 1.53, 1.54]), k, np.array([2.0, 2.0, 2.3, 2.0, 2.0]))
    assert _accept(n, k, chi2, smooth, parity=0).tolist() == [False, False, True, False, False]
    rough_but_better = (np.array([1.50, 1.51, 2.40, 1.53, 1.54]), k, np.array([2.0, 2.0, 0.5, 2.0, 2.0]))
    assert _accept(n, k, chi2, rough_but_better, parity=0)[2]
    worse_and_smooth = (smooth[0], k, np.array([2.0, 2.0, 3.5, 2.0, 2.0]))
    assert not _accept(n, k, chi2, worse_and_smooth, parity=0)[2]
    assert not _accept(n, k, chi2, smooth, parity=1)[2]     # odd wavelengths only in this half-step
