"""Thick incoherent slabs: intensity sums and the depolarizing Mueller sum.

References: the incoherent multiple-reflection sum of Katsidis and Siapkas,
Appl. Opt. 41, 3978 (2002); Macleod, Thin-Film Optical Filters (4th ed. 2010),
thick slab R and T (section from memory); amplitudes from the tmm package
(Byrnes, arXiv:1603.02720).
"""
import numpy as np
import pytest
import tmm

from lamina.optics import delta_from_tmm, solve


def test_transparent_slab_at_normal_incidence():
    # lossless slab: R = 2 R1 / (1 + R1), T = (1 - R1) / (1 + R1) (Macleod 2010)
    n = 1.52
    r1 = ((n - 1) / (n + 1)) ** 2
    out = solve([1.0, n, 1.0], [1e6], [False], [400.0, 700.0], 0.0)
    np.testing.assert_allclose(out["R"], 2 * r1 / (1 + r1), rtol=1e-13)
    np.testing.assert_allclose(out["T"], (1 - r1) / (1 + r1), rtol=1e-13)


def test_absorbing_slab_at_normal_incidence():
    # R = R1 + T1^2 R1 P^2 / (1 - R1^2 P^2), T = T1^2 P / (1 - R1^2 P^2), P = exp(-4 pi k d / lambda)
    # (Macleod 2010; Beer-Lambert single-pass loss)
    n, k, d, wl = 1.5, 2e-6, 1e6, 500.0
    r1 = abs((1 - complex(n, k)) / (1 + complex(n, k))) ** 2
    t1 = 1 - r1  # interface transmittance of a weakly absorbing medium, |k| << n
    single = np.exp(-4 * np.pi * k * d / wl)
    out = solve([1.0, complex(n, k), 1.0], [d], [False], wl, 0.0)
    assert out["R"][0, 0] == pytest.approx(r1 + t1**2 * r1 * single**2 / (1 - r1**2 * single**2), rel=1e-9)
    assert out["T"][0, 0] == pytest.approx(t1**2 * single / (1 - r1**2 * single**2), rel=1e-9)


def _ray_sum(n_front, d_front, n_slab, n_back, d_back, d_slab, angle_deg, wl):
    """Explicit sum over 400 reflected beams with tmm amplitudes (Katsidis and Siapkas 2002)."""
    th0 = np.radians(angle_deg)
    th_slab = tmm.snell(n_front[0], n_slab, th0)
    front = [n_front, [np.inf] + d_front + [np.inf]]
    amp = {}
    for pol in ("s", "p"):
        down = tmm.coh_tmm(pol, front[0] + [n_slab], front[1], th0, wl)
        up = tmm.coh_tmm(pol, [n_slab] + n_front[::-1], [np.inf] + d_front[::-1] + [np.inf], th_slab, wl)
        back = tmm.coh_tmm(pol, [n_slab] + n_back, [np.inf] + d_back + [np.inf], th_slab, wl)
        amp[pol] = (down["r"], down["t"], up["r"], up["t"], back["r"])
    kz = 2 * np.pi * n_slab * np.cos(th_slab) / wl
    phase = np.exp(2j * kz * d_slab)
    beams = {}
    for pol, (r, t, r_up, t_up, r_back) in amp.items():
        j = np.arange(1, 400)
        beams[pol] = np.concatenate([[r], t * t_up * r_back**j * r_up ** (j - 1) * phase**j])
    rs2 = np.sum(abs(beams["s"]) ** 2)
    rp2 = np.sum(abs(beams["p"]) ** 2)
    # each beam's Mueller matrix added in intensity (Fujiwara 2007);
    # lamina's rho is conj(rp/rs) (see ellipsometry.py)
    cross = np.sum(beams["s"] * np.conj(beams["p"]))
    big_n = (rs2 - rp2) / (rs2 + rp2)
    big_c = 2 * cross.real / (rs2 + rp2)
    big_s = 2 * cross.imag / (rs2 + rp2)
    return rs2, rp2, big_n, big_c, big_s


@pytest.mark.parametrize("angle", [45.0, 65.0, 75.0])
@pytest.mark.parametrize("slab_k", [0.0, 1e-5])
def test_mueller_sum_of_slab_beams(angle, slab_k):
    wl = 550.0
    n_front, d_front = [1.0, 1.38, 2.1 + 0.02j], [90.0, 60.0]
    n_slab = complex(1.52, slab_k)
    n_back, d_back = [1.46, 1.0], [120.0]
    d_slab = 7e5
    rs2, rp2, big_n, big_c, big_s = _ray_sum(n_front, d_front, n_slab, n_back, d_back, d_slab, angle, wl)
    n = [m for m in n_front] + [n_slab] + n_back
    out = solve(n, d_front + [d_slab] + d_back, [True, True, False, True], wl, angle)
    assert out["Rs"][0, 0] == pytest.approx(rs2, rel=1e-10)
    assert out["Rp"][0, 0] == pytest.approx(rp2, rel=1e-10)
    for key, ref in (("N", big_n), ("C", big_c), ("S", big_s)):
        assert out[key][0, 0] == pytest.approx(ref, abs=1e-10), key
    polarization = np.sqrt(big_n**2 + big_c**2 + big_s**2)
    assert out["P"][0, 0] == pytest.approx(polarization, abs=1e-10)
    assert out["P"][0, 0] < 0.9999  # backside light depolarizes
    psi = 0.5 * np.degrees(np.arctan2(np.hypot(big_c, big_s), big_n))
    delta = np.degrees(np.arctan2(big_s, big_c)) % 360
    assert out["psi"][0, 0] == pytest.approx(psi, abs=1e-7)
    assert out["delta"][0, 0] == pytest.approx(delta, abs=1e-7)


def test_opaque_or_index_matched_backside_gives_the_semi_infinite_result():
    # nothing returns from the back: the slab acts as a semi-infinite substrate (common practice)
    wl, angle = 600.0, 70.0
    film = [1.0, 1.46]
    for slab, exit_medium in ((1.52, 1.52), (1.52 + 1e-3j, 1.0)):  # index-matched back; opaque slab (P ~ exp(-2e4))
        reference = solve(film + [slab], [100.0], [True], wl, angle)
        out = solve(film + [slab, exit_medium], [100.0, 1e6], [True, False], wl, angle)
        assert out["P"][0, 0] == pytest.approx(1.0, abs=1e-12)
        assert out["psi"][0, 0] == pytest.approx(reference["psi"][0, 0], abs=1e-9)
        assert out["delta"][0, 0] == pytest.approx(reference["delta"][0, 0], abs=1e-9)
        assert out["R"][0, 0] == pytest.approx(reference["R"][0, 0], rel=1e-12)


def test_front_amplitudes_reported_with_a_slab():
    # with an incoherent layer rs, rp are the front part's coherent amplitudes (solver docstring)
    wl, angle = 600.0, 60.0
    out = solve([1.0, 1.46, 1.52, 1.0], [100.0, 1e6], [True, False], wl, angle)
    ref = tmm.coh_tmm("p", [1.0, 1.46, 1.52], [np.inf, 100.0, np.inf], np.radians(angle), wl)
    assert out["rp"][0, 0] == pytest.approx(ref["r"], abs=1e-12)
    ell = tmm.ellips([1.0, 1.46, 1.52], [np.inf, 100.0, np.inf], np.radians(angle), wl)
    # and Psi/Delta are not those of the front reflection alone
    assert abs(out["delta"][0, 0] - delta_from_tmm(ell["Delta"])) > 1e-3 or \
        abs(out["psi"][0, 0] - np.degrees(ell["psi"])) > 1e-3
