"""Instrument averaging: Gauss-Hermite quadrature in intensity / Mueller space."""
import numpy as np
import pytest

from lamina.errors import LaminaInputError
from lamina.optics import solve
from lamina.optics.averaging import Instrument, averaged_solve, normal_nodes

SI = 3.882 + 0.019j  # constant stand-in for silicon near 633 nm (from memory; demo only)


def oxide_on_si(thickness=250.0):
    n = [1.0, 1.46, SI]
    return (lambda wl: [np.ones_like(wl, dtype=complex), np.full(wl.shape, 1.46 + 0j), np.full(wl.shape, SI)]), \
        [thickness], [True], n


def test_zero_settings_give_exactly_the_unaveraged_result():
    n_at, d, c, _ = oxide_on_si()
    wl, ang = np.linspace(400, 800, 11), [0.0, 65.0, 75.0]
    plain = solve(n_at(wl), d, c, wl, ang)
    for instrument in (None, Instrument()):
        out = averaged_solve(n_at, d, c, wl, ang, instrument)
        for key in plain:
            np.testing.assert_array_equal(out[key], plain[key])


def test_gauss_hermite_rule_matches_a_dense_gaussian_average():
    # Gauss-Hermite quadrature of a smooth integrand (Abramowitz and Stegun 1964, ch. 25) against a
    # brute-force trapezoid average over 4001 thickness samples (common practice)
    n_at, d, c, _ = oxide_on_si(300.0)
    wl, ang, sigma_pct = np.array([500.0, 633.0]), 70.0, 1.0
    out = averaged_solve(n_at, d, c, wl, ang, Instrument(thickness_nonuniformity_pct=sigma_pct, nodes=9))
    x = np.linspace(-6, 6, 4001)
    weights = np.exp(-0.5 * x**2)
    weights /= np.trapezoid(weights, x)
    dense = solve(n_at(wl), [300.0 * (1 + sigma_pct / 100 * x)], c, wl, ang)
    for key in ("Rs", "Rp", "R", "T"):
        ref = np.trapezoid(dense[key][:, 0, :] * weights[:, None], x, axis=0)
        np.testing.assert_allclose(out[key][0], ref, rtol=1e-6, err_msg=key)
    ref_n = np.trapezoid((dense["Rs"] - dense["Rp"])[:, 0, :] * weights[:, None], x, axis=0) / \
        np.trapezoid((dense["Rs"] + dense["Rp"])[:, 0, :] * weights[:, None], x, axis=0)
    np.testing.assert_allclose(out["N"][0], ref_n, atol=1e-7)


def test_nonuniformity_lowers_the_degree_of_polarization():
    # averaging Mueller matrices of different thicknesses depolarizes (Fujiwara 2007; from memory)
    n_at, d, c, _ = oxide_on_si(400.0)
    wl = np.linspace(400, 800, 41)
    p_values = [averaged_solve(n_at, d, c, wl, 70.0, Instrument(thickness_nonuniformity_pct=s))["P"]
                for s in (0.0, 1.0, 3.0)]
    np.testing.assert_allclose(p_values[0], 1.0, atol=1e-13)
    assert np.all(p_values[1] <= 1.0 + 1e-13)
    assert p_values[1].min() < 0.999
    assert np.all(p_values[2] <= p_values[1] + 1e-12)
    assert p_values[2].mean() < p_values[1].mean()


def test_bandwidth_washes_out_the_fringes_of_a_thick_film():
    # a 20 um film (n = 1.5) on Si: fringe phase phi = 4 pi n d / lambda changes by
    # dphi/dlambda = 4 pi n d / lambda^2 ~ 1.05 rad/nm at 600 nm.  A Gaussian slit of
    # standard deviation sigma damps the first fringe harmonic by exp(-(sigma dphi/dlambda)^2 / 2)
    # (the Fourier transform of a Gaussian; common practice) = 0.085 for FWHM 5 nm.
    n_film, d = 1.5, 20000.0
    n_at = lambda wl: [np.ones(wl.shape, complex), np.full(wl.shape, n_film + 0j), np.full(wl.shape, 3.9 + 0.02j)]
    wl = np.linspace(597, 603, 121)
    sharp = averaged_solve(n_at, [d], [True], wl, 0.0)
    smooth = averaged_solve(n_at, [d], [True], wl, 0.0, Instrument(bandwidth_nm=5.0, nodes=11))
    sigma = 5.0 / (2 * np.sqrt(2 * np.log(2)))
    damping = np.exp(-0.5 * (sigma * 4 * np.pi * n_film * d / 600.0**2) ** 2)
    ratio = np.ptp(smooth["R"]) / np.ptp(sharp["R"])
    assert np.ptp(sharp["R"]) > 0.15
    assert ratio == pytest.approx(damping, rel=0.25)  # higher harmonics of the Airy fringes differ
    # the mean level approaches the incoherent (intensity-sum) result
    incoherent = solve(n_at(wl), [d], [False], wl, 0.0)
    assert abs(smooth["R"].mean() - incoherent["R"].mean()) < 0.01


def test_angle_spread_of_bare_substrate_is_second_order():
    # symmetric spread: the change of R is ~ sigma^2 R''/2 (Taylor, common practice)
    n_at = lambda wl: [np.ones(wl.shape, complex), np.full(wl.shape, SI)]
    wl = np.array([633.0])
    plain = averaged_solve(n_at, [], [], wl, 70.0)
    spread = averaged_solve(n_at, [], [], wl, 70.0, Instrument(angle_spread_deg=0.5))
    h = 0.01
    around = solve(n_at(wl), [], [], wl, [70.0 - h, 70.0, 70.0 + h])["R"][:, 0]
    second = (around[0] - 2 * around[1] + around[2]) / h**2
    assert spread["R"][0, 0] - plain["R"][0, 0] == pytest.approx(0.5 * 0.5**2 * second, rel=5e-3)
    assert spread["P"][0, 0] < 1.0


def test_batch_and_averaging_together():
    n_at, d, c, _ = oxide_on_si()
    instrument = Instrument(thickness_nonuniformity_pct=2.0, angle_spread_deg=0.3, bandwidth_nm=2.0)
    wl = np.linspace(450, 750, 7)
    thickness = np.array([100.0, 250.0, 400.0])
    batch = averaged_solve(n_at, [thickness], c, wl, [60.0, 70.0], instrument)
    for b, t in enumerate(thickness):
        single = averaged_solve(n_at, [t], c, wl, [60.0, 70.0], instrument)
        for key in ("psi", "delta", "R", "P"):
            np.testing.assert_allclose(batch[key][b], single[key], rtol=1e-12, atol=1e-12)


def test_nodes_and_settings_are_checked():
    x, w = normal_nodes(5, 2.0)
    assert x[2] == 0.0 and w.sum() == pytest.approx(1.0)
    assert np.sum(w * x**2) == pytest.approx(4.0)  # variance sigma^2
    with pytest.raises(LaminaInputError):
        Instrument(bandwidth_nm=-1.0)
    with pytest.raises(LaminaInputError):
        Instrument(nodes=4)
    n_at, d, c, _ = oxide_on_si()
    with pytest.raises(LaminaInputError, match="grazing"):
        averaged_solve(n_at, d, c, np.array([600.0]), 88.0, Instrument(angle_spread_deg=1.0))
