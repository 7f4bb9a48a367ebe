"""Closed-form checks of lamina.optics.solve: Fresnel equations, Brewster's
angle, quarter-wave coatings, energy conservation, thickness periodicity,
pseudo-dielectric function, the Delta convention values, normal incidence."""
import numpy as np
import pytest

from lamina.optics import solve


def bare(n_sub, angle_deg, wavelength=632.8, n_amb=1.0):
    return solve([n_amb, n_sub], [], [], wavelength, angle_deg)


def test_single_interface_fresnel_equations():
    # Fresnel formulae, Born and Wolf, Principles of Optics (7th ed. 1999), ch. 1 (section from memory),
    # with r_p in the tmm sign convention (r_p = -r_s at normal incidence)
    n1, n2 = 1.0, 1.7
    angles = np.linspace(0, 85, 18)
    out = solve([n1, n2], [], [], 500.0, angles)
    th = np.radians(angles)
    tt = np.arcsin(n1 * np.sin(th) / n2)
    ci, ct = np.cos(th), np.cos(tt)
    rs = (n1 * ci - n2 * ct) / (n1 * ci + n2 * ct)
    rp = (n2 * ci - n1 * ct) / (n2 * ci + n1 * ct)
    ts = 2 * n1 * ci / (n1 * ci + n2 * ct)
    tp = 2 * n1 * ci / (n2 * ci + n1 * ct)
    np.testing.assert_allclose(out["rs"][:, 0], rs, atol=1e-14)
    np.testing.assert_allclose(out["rp"][:, 0], rp, atol=1e-14)
    np.testing.assert_allclose(out["ts"][:, 0], ts, atol=1e-14)
    np.testing.assert_allclose(out["tp"][:, 0], tp, atol=1e-14)
    np.testing.assert_allclose(out["Ts"][:, 0], n2 * ct / (n1 * ci) * ts**2, atol=1e-14)
    np.testing.assert_allclose(out["Tp"][:, 0], n2 * ct / (n1 * ci) * tp**2, atol=1e-14)


def test_brewster_angle_of_glass():
    # tan(theta_B) = n2/n1 (Brewster's law; Born and Wolf 1999, ch. 1): 56.31 deg for n = 1.5; R_p = 0 there
    theta_b = np.degrees(np.arctan(1.5))
    assert theta_b == pytest.approx(56.31, abs=0.005)
    out = bare(1.5, [theta_b - 1, theta_b, theta_b + 1])
    assert out["Rp"][1, 0] < 1e-30
    assert out["Rs"][1, 0] > 0.1
    # Delta convention (DEVELOPERS.md): 180 below Brewster, 0 above
    assert out["delta"][0, 0] == pytest.approx(180.0, abs=1e-9)
    assert out["delta"][2, 0] == pytest.approx(0.0, abs=1e-9)


@pytest.mark.parametrize("n_sub, angle, psi, delta", [
    (0.2 + 3.3j, 70.0, 43.46, 106.18),   # values stated in DEVELOPERS.md / the brief
    (3.882 + 0.019j, 70.0, 10.57, 179.23),  # bare Si at 632.8 nm, same source
])
def test_delta_convention_absorbing_substrates(n_sub, angle, psi, delta):
    out = bare(n_sub, angle)
    assert out["psi"][0, 0] == pytest.approx(psi, abs=0.005)
    assert out["delta"][0, 0] == pytest.approx(delta, abs=0.005)
    assert 0 < out["delta"][0, 0] < 180


def test_delta_convention_transparent_substrate():
    # bare transparent substrate: Delta = 180 below Brewster, 0 above (common practice)
    out = bare(2.0, [10.0, 45.0, 62.0, 70.0, 85.0])  # Brewster at 63.43 deg
    np.testing.assert_allclose(out["delta"][:3, 0], 180.0, atol=1e-9)
    np.testing.assert_allclose(out["delta"][3:, 0] % 360, 0.0, atol=1e-9)


def test_quarter_wave_antireflection_coating():
    # Macleod, Thin-Film Optical Filters (4th ed. 2010), antireflection chapter: single quarter-wave
    # layer, R = ((n0 ns - n1^2) / (n0 ns + n1^2))^2; MgF2 (1.38) on crown glass (1.52)
    design = 550.0
    out = solve([1.0, 1.38, 1.52], [design / (4 * 1.38)], [True], design, 0.0)
    expected = ((1.52 - 1.38**2) / (1.52 + 1.38**2)) ** 2
    assert out["R"][0, 0] == pytest.approx(expected, rel=1e-12)
    assert expected == pytest.approx(0.0126, abs=1e-4)


@pytest.mark.parametrize("pairs", [1, 3, 6])
def test_quarter_wave_mirror_peak_reflectance(pairs):
    # Macleod (2010), quarter-wave stack reflectors: (HL)^N H on substrate ns in air, at the design wavelength
    # Y = (nH/nL)^(2N) nH^2 / ns and R = ((1 - Y) / (1 + Y))^2
    n_h, n_l, n_s, design = 2.35, 1.46, 1.52, 600.0
    n = [1.0] + [n_h, n_l] * pairs + [n_h] + [n_s]
    d = [design / (4 * m) for m in n[1:-1]]
    out = solve(n, d, [True] * len(d), design, 0.0)
    admittance = (n_h / n_l) ** (2 * pairs) * n_h**2 / n_s
    assert out["R"][0, 0] == pytest.approx(((1 - admittance) / (1 + admittance)) ** 2, rel=1e-12)


def test_energy_balance_and_lossless_absorptance():
    # R + T + A = 1 by definition; for lossless media A = 0 (energy conservation,
    # Born and Wolf 1999, ch. 1), coherent and incoherent, any angle
    rng = np.random.default_rng(7)
    wl = np.linspace(300, 1000, 15)
    angles = np.linspace(0, 85, 9)
    for _ in range(10):
        layers = int(rng.integers(1, 6))
        n = [1.0] + list(rng.uniform(1.3, 3.0, layers)) + [rng.uniform(1.3, 2.0)]
        d = list(rng.uniform(5, 400, layers))
        coherent = [bool(c) for c in rng.random(layers) < 0.7]
        if not coherent[-1]:
            d[-1] = 1e6
        out = solve(n, d, coherent, wl, angles)
        np.testing.assert_allclose(out["R"] + out["T"] + out["A"], 1.0, atol=1e-14)
        np.testing.assert_allclose(out["A"], 0.0, atol=1e-12)
    absorbing = solve([1.0, 2.0 + 0.3j, 1.5], [80.0], [True], wl, angles)
    assert np.all(absorbing["A"] > 0)


def test_transparent_film_period_in_thickness():
    # a transparent film's response repeats when its thickness grows by
    # lambda / (2 sqrt(n^2 - sin^2 theta)) (phase thickness + pi; common practice)
    n_film, wl, angle = 1.46, 632.8, 70.0
    period = wl / (2 * np.sqrt(n_film**2 - np.sin(np.radians(angle)) ** 2))
    d = np.array([37.0, 37.0 + period, 37.0 + 3 * period])
    out = solve([1.0, np.full((3, 1), n_film), 3.882 + 0.019j], [d], [True], wl, angle)
    np.testing.assert_allclose(out["psi"][:, 0, 0], out["psi"][0, 0, 0], atol=1e-9)
    np.testing.assert_allclose(out["delta"][:, 0, 0], out["delta"][0, 0, 0], atol=1e-9)
    half = solve([1.0, n_film, 3.882 + 0.019j], [37.0 + period / 2], [True], wl, angle)
    assert abs(half["psi"][0, 0] - out["psi"][0, 0, 0]) > 0.1


@pytest.mark.parametrize("n_sub", [1.5, 3.882 + 0.019j, 0.2 + 3.3j, 1.2 + 7.0j])
def test_pseudo_dielectric_function_of_bare_substrate(n_sub):
    # two-phase model: <eps> equals the substrate's eps (Azzam and Bashara 1977)
    angles = np.array([0.0, 20.0, 45.0, 65.0, 75.0, 85.0])
    out = bare(n_sub, angles)
    eps = complex(n_sub) ** 2
    np.testing.assert_allclose(out["eps_pseudo"][1:, 0], eps, rtol=1e-10)
    # normal incidence: the theta -> 0 limit, evaluated at 0.01 deg (error ~ theta^2)
    np.testing.assert_allclose(out["eps_pseudo"][0, 0], eps, rtol=1e-6)
    # just above normal incidence (rho + 1 ~ theta^2 below round-off): the same, finite
    tiny = bare(n_sub, [1e-26, 1e-9, 0.004])
    np.testing.assert_allclose(tiny["eps_pseudo"][:, 0], eps, rtol=1e-6)
    assert np.all(out["eps_pseudo"].imag >= -1e-12)


def test_pseudo_dielectric_function_with_absorbing_ambient():
    # <eps> = eps_a sin^2 th [1 + tan^2 th ((1 - rho)/(1 + rho))^2] (Azzam and Bashara 1977):
    # the bare substrate is recovered with a (weakly) absorbing ambient too
    out = bare(3.882 + 0.019j, [60.0, 70.0], n_amb=1.33 + 0.01j)
    np.testing.assert_allclose(out["eps_pseudo"][:, 0], (3.882 + 0.019j) ** 2, rtol=1e-10)


def test_normal_incidence_is_finite_and_delta_180():
    # at normal incidence s and p coincide: rho = -1, Psi = 45, Delta = 180 (common practice),
    # also for a perfect anti-reflection coating where R = 0 (0/0 in rp/rs)
    n_s = 1.52
    perfect = [1.0, np.sqrt(n_s), n_s]
    stacks = [([1.0, 1.46, 3.88 + 0.02j], [100.0], [True]),
              (perfect, [550.0 / (4 * np.sqrt(n_s))], [True]),
              ([1.0, 1.52, 1.52, 1.0], [100.0, 1e6], [True, False])]
    for n, d, c in stacks:
        out = solve(n, d, c, [500.0, 550.0], 0.0)
        for key, value in out.items():
            assert np.all(np.isfinite(value)), key
        np.testing.assert_allclose(out["psi"], 45.0, atol=1e-12)
        np.testing.assert_allclose(out["delta"], 180.0, atol=1e-12)
        np.testing.assert_allclose(out["P"], 1.0, atol=1e-12)
    assert solve(perfect, [550.0 / (4 * np.sqrt(n_s))], [True], 550.0, 0.0)["R"][0, 0] < 1e-30


def test_index_matched_ambient_reflects_nothing_and_stays_finite():
    # ambient = substrate: no interface; Psi/Delta use the index-matched limit rho = -cos 2theta
    # (derived in ellipsometry.mueller_from_sums), <eps> = eps_ambient
    out = solve([1.5, 1.5], [], [], 600.0, [0.0, 30.0, 60.0])
    for key, value in out.items():
        assert np.all(np.isfinite(value)), key
    np.testing.assert_allclose(out["R"], 0.0, atol=1e-30)
    np.testing.assert_allclose(out["T"], 1.0, atol=1e-14)
    np.testing.assert_allclose(out["eps_pseudo"], 2.25, rtol=1e-6)
    expected_psi = np.degrees(np.arctan(np.abs(np.cos(2 * np.radians([0.0, 30.0, 60.0])))))
    np.testing.assert_allclose(out["psi"][:, 0], expected_psi, atol=1e-9)


def test_mueller_elements_of_coherent_stack():
    # N = cos 2Psi, C = sin 2Psi cos Delta, S = sin 2Psi sin Delta, P = 1 (Fujiwara 2007; section from memory)
    out = solve([1.0, 2.0 + 0.1j, 3.88 + 0.02j], [60.0], [True], np.linspace(300, 900, 7), [50.0, 70.0])
    psi, delta = np.radians(out["psi"]), np.radians(out["delta"])
    np.testing.assert_allclose(out["N"], np.cos(2 * psi), atol=1e-13)
    np.testing.assert_allclose(out["C"], np.sin(2 * psi) * np.cos(delta), atol=1e-13)
    np.testing.assert_allclose(out["S"], np.sin(2 * psi) * np.sin(delta), atol=1e-13)
    np.testing.assert_allclose(out["P"], 1.0, atol=1e-13)


def test_zero_thickness_layer_is_invisible_even_at_grazing_in_layer():
    # d = 0 gives the identity matrix; q = 0 inside the layer (critical angle) stays finite
    angle = np.degrees(np.arcsin(1.2 / 1.5))  # N cos(theta) = 0 in the n = 1.2 layer
    ref = solve([1.5, 3.0], [], [], 600.0, angle)
    out = solve([1.5, 1.2, 3.0], [0.0], [True], 600.0, angle)
    thin = solve([1.5, 1.2, 3.0], [50.0], [True], 600.0, angle)
    np.testing.assert_allclose(out["rs"], ref["rs"], atol=1e-15)
    np.testing.assert_allclose(out["rp"], ref["rp"], atol=1e-15)
    assert all(np.all(np.isfinite(v)) for v in thin.values())


def test_total_internal_reflection_with_signed_zero_index():
    # an exit index whose imaginary part is -0.0 must still give the decaying evanescent
    # wave: R = 1, T = 0 beyond the critical angle (Born and Wolf 1999, ch. 1; common practice)
    exit_index = np.array([complex(1.0, -0.0)])
    out = solve([1.5, exit_index], [], [], 600.0, [45.0, 60.0, 80.0])
    np.testing.assert_allclose(out["R"], 1.0, atol=1e-14)
    np.testing.assert_allclose(out["T"], 0.0, atol=1e-14)
    # and the TIR phase: tan(Delta/2) magnitude = cos th sqrt(sin^2 th - n^2) / sin^2 th
    # (Born and Wolf 1999, total reflection; n = 1/1.5), Psi = 45
    th = np.radians([45.0, 60.0, 80.0])
    rel = 1 / 1.5
    half = np.degrees(np.arctan(np.cos(th) * np.sqrt(np.sin(th) ** 2 - rel**2) / np.sin(th) ** 2))
    np.testing.assert_allclose(out["psi"][:, 0], 45.0, atol=1e-12)
    delta = out["delta"][:, 0]
    np.testing.assert_allclose(np.minimum(delta, 360 - delta), 2 * half, atol=1e-9)
