"""lamina.optics.solve against the tmm package (Byrnes, "Multilayer optical
calculations", arXiv:1603.02720, 2016; tmm 0.2): coh_tmm, inc_tmm, ellips.

Random stacks of 0-6 layers, absorbing and transparent, angles 0-85 deg,
coherent and with thick incoherent slabs; seeded draws keep the run short and
reproducible.  Tolerances from the brief: r, t 1e-10; R, T 1e-9; Psi, Delta 1e-7 deg.
"""
import numpy as np
import pytest
import tmm

from lamina.optics import delta_from_tmm, delta_to_tmm, solve

WAVELENGTHS = np.array([350.0, 487.5, 633.0, 900.0])


def random_index(rng, absorbing):
    n = rng.uniform(1.2, 4.0)
    k = rng.uniform(0.0, 1.5) if absorbing else 0.0
    return complex(n, k)


def random_stack(rng, incoherent):
    """(n per medium, per wavelength), thicknesses, coherence flags, angle, ambient index."""
    layers = int(rng.integers(0, 7))
    ambient = complex(rng.choice([1.0, 1.0, 1.333, 1.5]))
    n = [np.full(WAVELENGTHS.size, ambient)]
    thickness, coherent = [], []
    for _ in range(layers):
        dispersive = random_index(rng, rng.random() < 0.4) * (1 + 0.05 * (500 / WAVELENGTHS - 1))
        n.append(dispersive)
        thickness.append(float(rng.uniform(0.0, 400.0)))
        coherent.append(True)
    if incoherent:
        slabs = int(rng.integers(1, 3))
        for _ in range(slabs):
            pos = int(rng.integers(0, len(thickness) + 1))
            slab_n = np.full(WAVELENGTHS.size, complex(rng.uniform(1.3, 3.5), rng.choice([0.0, 1e-6, 1e-5])))
            n.insert(pos + 1, slab_n)
            thickness.insert(pos, float(rng.uniform(2e4, 1e6)))
            coherent.insert(pos, False)
    n.append(np.full(WAVELENGTHS.size, random_index(rng, rng.random() < 0.5)))
    angle = float(rng.choice([0.0, rng.uniform(0, 85), rng.uniform(0, 85), 85.0]))
    return n, thickness, coherent, angle


def tmm_lists(n, thickness, coherent, w):
    n_list = [complex(m[w]) for m in n]
    d_list = [np.inf] + list(thickness) + [np.inf]
    c_list = ["i"] + ["c" if c else "i" for c in coherent] + ["i"]
    return n_list, d_list, c_list


@pytest.mark.parametrize("seed", range(30))
def test_coherent_stacks_match_tmm(seed):
    rng = np.random.default_rng(seed)
    n, thickness, coherent, angle = random_stack(rng, incoherent=False)
    out = solve(n, thickness, coherent, WAVELENGTHS, angle)
    th0 = np.radians(angle)
    for w, wl in enumerate(WAVELENGTHS):
        n_list, d_list, _ = tmm_lists(n, thickness, coherent, w)
        s = tmm.coh_tmm("s", n_list, d_list, th0, wl)
        p = tmm.coh_tmm("p", n_list, d_list, th0, wl)
        ell = tmm.ellips(n_list, d_list, th0, wl)
        np.testing.assert_allclose(out["rs"][0, w], s["r"], rtol=0, atol=1e-10)
        np.testing.assert_allclose(out["rp"][0, w], p["r"], rtol=0, atol=1e-10)
        np.testing.assert_allclose(out["ts"][0, w], s["t"], rtol=0, atol=1e-10)
        np.testing.assert_allclose(out["tp"][0, w], p["t"], rtol=0, atol=1e-10)
        for key, ref in (("Rs", s["R"]), ("Rp", p["R"]), ("Ts", s["T"]), ("Tp", p["T"])):
            np.testing.assert_allclose(out[key][0, w], ref, rtol=0, atol=1e-9, err_msg=key)
        np.testing.assert_allclose(out["psi"][0, w], np.degrees(ell["psi"]), rtol=0, atol=1e-7)
        assert _angle_diff(out["delta"][0, w], delta_from_tmm(ell["Delta"])) < 1e-7


@pytest.mark.parametrize("seed", range(100, 120))
def test_incoherent_stacks_match_tmm(seed):
    rng = np.random.default_rng(seed)
    n, thickness, coherent, angle = random_stack(rng, incoherent=True)
    out = solve(n, thickness, coherent, WAVELENGTHS, angle)
    th0 = np.radians(angle)
    for w, wl in enumerate(WAVELENGTHS):
        n_list, d_list, c_list = tmm_lists(n, thickness, coherent, w)
        s = tmm.inc_tmm("s", n_list, d_list, c_list, th0, wl)
        p = tmm.inc_tmm("p", n_list, d_list, c_list, th0, wl)
        for key, ref in (("Rs", s["R"]), ("Rp", p["R"]), ("Ts", s["T"]), ("Tp", p["T"])):
            np.testing.assert_allclose(out[key][0, w], ref, rtol=0, atol=1e-9, err_msg=key)


@pytest.mark.parametrize("seed", range(200, 210))
def test_absorbing_ambient_matches_tmm(seed):
    # lamina fixes a real tangential wave-vector kx = Re(N0) sin(theta0); tmm takes the same wave
    # as a complex angle th0 with N0 sin(th0) = kx (its coh_tmm requires N0 sin(th0) real)
    rng = np.random.default_rng(seed)
    n, thickness, coherent, angle = random_stack(rng, incoherent=bool(seed % 2))
    n0 = complex(1.4, rng.uniform(0.001, 0.3))
    n[0] = np.full(WAVELENGTHS.size, n0)
    out = solve(n, thickness, coherent, WAVELENGTHS, angle)
    th0 = np.arcsin(n0.real * np.sin(np.radians(angle)) / n0 + 0j)
    for w, wl in enumerate(WAVELENGTHS):
        n_list, d_list, c_list = tmm_lists(n, thickness, coherent, w)
        for pol in ("s", "p"):
            if all(coherent):
                ref = tmm.coh_tmm(pol, n_list, d_list, th0, wl)
                np.testing.assert_allclose(out["r" + pol][0, w], ref["r"], rtol=0, atol=1e-10)
                np.testing.assert_allclose(out["t" + pol][0, w], ref["t"], rtol=0, atol=1e-10)
            else:
                ref = tmm.inc_tmm(pol, n_list, d_list, c_list, th0, wl)
            np.testing.assert_allclose(out["R" + pol][0, w], ref["R"], rtol=0, atol=1e-9)
            np.testing.assert_allclose(out["T" + pol][0, w], ref["T"], rtol=0, atol=1e-9)


def test_total_internal_reflection_matches_tmm():
    # glass ambient (n = 1.5) onto a thin film on air, beyond the critical angle 41.8 deg
    n = [np.full(2, 1.5 + 0j), np.full(2, 1.38 + 0j), np.full(2, 1.0 + 0j)]
    for angle in (45.0, 60.0, 80.0):
        out = solve(n, [120.0], [True], [500.0, 700.0], angle)
        for w, wl in enumerate((500.0, 700.0)):
            for pol in ("s", "p"):
                ref = tmm.coh_tmm(pol, [1.5, 1.38, 1.0], [np.inf, 120.0, np.inf], np.radians(angle), wl)
                np.testing.assert_allclose(out["r" + pol][0, w], ref["r"], atol=1e-10)
                np.testing.assert_allclose(out["R" + pol][0, w], 1.0, atol=1e-12)
                np.testing.assert_allclose(out["T" + pol][0, w], 0.0, atol=1e-12)


def test_delta_conversion_round_trip_and_values():
    # tmm.ellips reports angle(-rp/rs) in radians; lamina: 180 deg - that (see ellipsometry.py)
    assert delta_from_tmm(0.0) == 180.0
    assert delta_from_tmm(np.pi) == 0.0
    assert delta_from_tmm(np.radians(73.82)) == pytest.approx(106.18)
    deltas = np.linspace(0, 359.9, 50)
    np.testing.assert_allclose(delta_from_tmm(delta_to_tmm(deltas)), deltas, atol=1e-12)
    # bare absorbing substrate (N = 0.2 + 3.3i, 70 deg): the value the brief states
    ell = tmm.ellips([1.0, 0.2 + 3.3j], [np.inf, np.inf], np.radians(70.0), 632.8)
    assert delta_from_tmm(ell["Delta"]) == pytest.approx(106.18, abs=0.01)


def test_batch_matches_tmm():
    # (B, W) indices and (B,) thicknesses: every batch member agrees with tmm
    thickness = np.array([10.0, 150.0, 333.0])
    film = np.array([[1.46 + 0j] * 2, [1.9 + 0.01j] * 2, [2.3 + 0.2j] * 2])
    n = [np.ones(2, complex), film, np.full(2, 3.88 + 0.02j)]
    out = solve(n, [thickness], [True], [450.0, 650.0], [55.0, 75.0])
    assert out["psi"].shape == (3, 2, 2)
    for b in range(3):
        for a, angle in enumerate((55.0, 75.0)):
            for w, wl in enumerate((450.0, 650.0)):
                n_list = [1.0, film[b, w], 3.88 + 0.02j]
                ell = tmm.ellips(n_list, [np.inf, thickness[b], np.inf], np.radians(angle), wl)
                assert abs(out["psi"][b, a, w] - np.degrees(ell["psi"])) < 1e-7
                assert _angle_diff(out["delta"][b, a, w], delta_from_tmm(ell["Delta"])) < 1e-7


def _angle_diff(a, b):
    d = abs(a - b) % 360.0
    return min(d, 360.0 - d)


def test_opaque_coherent_layers_match_tmm_and_stay_finite():
    # |Im(delta)| is capped at 35 as in tmm's coh_tmm (Byrnes 2016, the "opacity" reset):
    # a 1 um metal-like film (Im delta ~ 41-87) and a 50 um silicon-like coherent layer
    wl = np.array([400.0, 800.0])
    for n_film, d in ((0.2 + 3.3j, 1000.0), (3.9 + 0.02j, 50000.0)):
        n = [np.ones(2, complex), np.full(2, n_film), np.full(2, 1.5 + 0j)]
        out = solve(n, [d], [True], wl, [0.0, 70.0])
        assert all(np.all(np.isfinite(v)) for v in out.values())
        for a, angle in enumerate((0.0, 70.0)):
            for w, lam in enumerate(wl):
                for pol in ("s", "p"):
                    ref = tmm.coh_tmm(pol, [1.0, n_film, 1.5], [np.inf, d, np.inf], np.radians(angle), lam)
                    np.testing.assert_allclose(out["r" + pol][a, w], ref["r"], atol=1e-10)
                    np.testing.assert_allclose(out["T" + pol][a, w], ref["T"], atol=1e-9)
