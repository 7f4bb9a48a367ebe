"""Statistical honesty of the uncertainties: coverage of +-1 sigma and reduced chi-square.

For a model that is nearly linear over the noise, the least-squares estimate
is normal with covariance (J^T W J)^-1 (Press et al., Numerical Recipes 3rd
ed. 2007, sec. 15.6; Bevington and Robinson 2003, ch. 8), so the true value
lies within +-1 sigma in 68.3 % of noisy realizations, and chi-square / dof
averages 1 when the noise matches the stated errors.  Data come from tmm; the
noise is redrawn for every realization (fixed seeds: the test is repeatable).
"""
import numpy as np
import pytest

import lamina
from lamina.dispersion import Constant
from lamina.parameters import Param
from lamina.stack import Layer, Stack

SI = 3.882 + 0.019j          # convention anchor of DEVELOPERS.md (from memory, ~Green 2008)
TRUE_NM, TRUE_N = 50.0, 1.46
N_REALIZATIONS = 150


@pytest.fixture(scope="module")
def clean(tmm_data):
    return tmm_data.ellipsometry([lambda wl: np.ones_like(wl), lambda wl: np.full_like(wl, TRUE_N, dtype=complex),
                                  lambda wl: np.full_like(wl, SI, dtype=complex)],
                                 [TRUE_NM], (65.0, 75.0), np.linspace(350, 850, 12))


def stack():
    return Stack([Layer("film", Constant(Param(1.5, 1.2, 2.0, vary=True)), Param(45.0, 0.0, 300.0, vary=True))],
                 Constant(SI.real, SI.imag))


def realizations(clean, sigma_psi, sigma_delta, with_err, seed):
    rng = np.random.default_rng(seed)
    for _ in range(N_REALIZATIONS):
        noisy = clean.copy(deep=True)
        noisy["psi"] = clean["psi"] + rng.normal(0, sigma_psi, clean["psi"].shape)
        noisy["delta"] = clean["delta"] + rng.normal(0, sigma_delta, clean["delta"].shape)
        if with_err:
            noisy["psi_err"] = clean["psi"] * 0 + sigma_psi
            noisy["delta_err"] = clean["delta"] * 0 + sigma_delta
        else:
            noisy = noisy.drop_vars(["psi_err", "delta_err"])
        yield noisy


def coverage(clean, sigma_psi, sigma_delta, with_err, seed):
    inside = {"film.thickness_nm": 0, "film.material.n": 0}
    truth = {"film.thickness_nm": TRUE_NM, "film.material.n": TRUE_N}
    reduced = []
    for data in realizations(clean, sigma_psi, sigma_delta, with_err, seed):
        result = lamina.fit(stack(), data)
        assert result.success
        reduced.append(result.statistics["reduced_chi2"])
        for name in inside:
            entry = result.parameters[name]
            inside[name] += abs(entry["value"] - truth[name]) <= entry["stderr"]
    return {k: v / N_REALIZATIONS for k, v in inside.items()}, float(np.mean(reduced))


def test_coverage_with_trusted_errors(clean):
    # noise equals the _err columns: unscaled covariance; 68 % +- 8 % coverage, mean reduced chi2 ~ 1
    fractions, mean_reduced = coverage(clean, 0.02, 0.05, with_err=True, seed=101)
    for name, fraction in fractions.items():
        assert 0.60 <= fraction <= 0.76, (name, fraction)
    # chi2/dof of 48 - 2 dof has sd 0.21; the mean of 150 has sd 0.017
    assert mean_reduced == pytest.approx(1.0, abs=0.06)


def test_coverage_with_default_sigmas_scaled_by_reduced_chi2(clean):
    # noise 3x the defaults and no _err columns: covariance scaled by reduced chi2 keeps the coverage
    fractions, mean_reduced = coverage(clean, 0.06, 0.15, with_err=False, seed=202)
    for name, fraction in fractions.items():
        assert 0.60 <= fraction <= 0.76, (name, fraction)
    assert mean_reduced == pytest.approx(9.0, rel=0.1)
