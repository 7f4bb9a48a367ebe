"""The solver's fast paths against its general complex computation and against tmm.

Fast paths (src/lamina/optics/solver.py): s only when every angle is 0; real
arithmetic for lossless layers with a propagating wave; ``quantities=``.  They
must give the general path's numbers to round-off (1e-12 here) on random
stacks -- transparent, absorbing, mixed, with thick incoherent slabs, at
normal and oblique incidence -- and must be the path actually taken where
they apply and not where they do not (absorbing layers, evanescent waves).
External references: the tmm package (Byrnes, "Multilayer optical
calculations", arXiv:1603.02720, 2016) and the quarter-wave formula.
"""
from unittest import mock

import numpy as np
import pytest
import tmm

from lamina.errors import LaminaInputError
from lamina.optics import KEYS, solve
from lamina.optics import coherent, solver
from lamina.optics.ellipsometry import wrap_delta_deg

WAVELENGTHS = np.linspace(380.0, 820.0, 23)
AMPLITUDES = ("rs", "rp", "ts", "tp")


def random_stack(rng, *, absorbing_share, slabs, batch=None):
    """n per medium (W,) or (batch, W), thicknesses (nm; floats or (batch,)), coherence flags."""
    layers = int(rng.integers(1, 8))
    n = [np.full(WAVELENGTHS.size, complex(rng.choice([1.0, 1.0, 1.333])))]
    thickness, coherent_flags = [], []
    for _ in range(layers):
        k = rng.uniform(0.0, 1.2) if rng.random() < absorbing_share else 0.0
        dispersion = 1 + 0.04 * (500 / WAVELENGTHS - 1)
        index = complex(rng.uniform(1.2, 3.6), k) * dispersion
        thick = float(rng.uniform(0.0, 600.0))
        if batch is not None:  # per-trial index scale and thickness, as the yield Monte Carlo perturbs them
            index = index[None, :] * (1 + 0.01 * rng.standard_normal(batch))[:, None]
            thick = thick * (1 + 0.02 * rng.standard_normal(batch)).clip(0)
        n.append(index)
        thickness.append(thick)
        coherent_flags.append(True)
    for _ in range(slabs):
        pos = int(rng.integers(0, len(thickness) + 1))
        n.insert(pos + 1, np.full(WAVELENGTHS.size, complex(rng.uniform(1.3, 3.5), rng.choice([0.0, 1e-6]))))
        thickness.insert(pos, float(rng.uniform(2e4, 1e6)))
        coherent_flags.insert(pos, False)
    n.append(np.full(WAVELENGTHS.size, complex(rng.uniform(1.3, 4.0), rng.choice([0.0, 0.0, 0.02, 3.0]))))
    return n, thickness, coherent_flags


def assert_paths_agree(n, thickness, flags, angles, **kw):
    fast = solve(n, thickness, flags, WAVELENGTHS, angles, fast_paths=True, **kw)
    general = solve(n, thickness, flags, WAVELENGTHS, angles, fast_paths=False, **kw)
    assert set(fast) == set(general)
    for key in fast:
        if key == "delta":
            difference = wrap_delta_deg(fast[key] - general[key] + 180.0) - 180.0
            np.testing.assert_allclose(difference, 0.0, rtol=0, atol=1e-9, err_msg=key)  # degrees
        elif key == "eps_pseudo":
            # below NEAR_NORMAL_DEG <eps> comes from 0.01 deg, where rho + 1 ~ theta^2 ~ 3e-8 magnifies
            # round-off ~1e8-fold (docs/optics.md); elsewhere it is as exact as the rest
            near_normal = np.asarray(angles, dtype=float).reshape(-1) < 1.0
            rtol = np.where(near_normal[:, None], 1e-5, 1e-10)
            np.testing.assert_array_less(np.abs(fast[key] - general[key]), rtol * np.abs(general[key]) + 1e-9,
                                         err_msg=key)
        elif key == "psi":
            np.testing.assert_allclose(fast[key], general[key], rtol=0, atol=1e-9, err_msg=key)  # degrees
        else:
            np.testing.assert_allclose(fast[key], general[key], rtol=0, atol=1e-12, err_msg=key)
    return fast


@pytest.mark.parametrize("seed", range(12))
def test_normal_incidence_lossless_batches_match_general_path(seed):
    # the yield Monte Carlo's case: angle 0, transparent layers, batch of perturbed stacks
    rng = np.random.default_rng(seed)
    n, thickness, flags = random_stack(rng, absorbing_share=0.0, slabs=int(seed % 3 == 0), batch=5)
    assert_paths_agree(n, thickness, flags, 0.0)


@pytest.mark.parametrize("seed", range(3))
def test_repeated_normal_angles_match_general_path(seed):
    # several angles, all 0: the ambient admittance has an angle axis the layers lack
    rng = np.random.default_rng(seed)
    n, thickness, flags = random_stack(rng, absorbing_share=0.3 * seed, slabs=seed % 2, batch=4)
    assert_paths_agree(n, thickness, flags, np.array([0.0, 0.0]))


@pytest.mark.parametrize("seed", range(20, 44))
def test_random_stacks_and_angles_match_general_path(seed):
    # absorbing and transparent layers, slabs, angles including 0 mixed with oblique ones
    rng = np.random.default_rng(seed)
    n, thickness, flags = random_stack(rng, absorbing_share=0.4, slabs=int(rng.integers(0, 3)),
                                       batch=3 if seed % 2 else None)
    choices = ([0.0], [0.0, 35.0, 70.0], [55.0, 75.0], [12.0], [85.0])
    assert_paths_agree(n, thickness, flags, np.array(choices[seed % len(choices)]))


def test_quarter_wave_coating_at_normal_incidence():
    # single quarter-wave layer: R = ((n0 ns - n1^2) / (n0 ns + n1^2))^2 at the design wavelength
    # (Macleod, Thin-Film Optical Filters, ch. 3; chapter from memory)
    n0, n1, ns, design = 1.0, 1.38, 1.52, 550.0
    out = solve([n0, n1, ns], [design / (4 * n1)], [True], design, 0.0, quantities=("R", "Rp"))
    expected = ((n0 * ns - n1**2) / (n0 * ns + n1**2)) ** 2
    np.testing.assert_allclose(out["R"][0, 0], expected, rtol=1e-13)
    np.testing.assert_allclose(out["Rp"][0, 0], expected, rtol=1e-13)


@pytest.mark.parametrize("angle", [0.0, 40.0, 72.0])
def test_lossless_stack_matches_tmm(angle):
    # tmm.coh_tmm per wavelength and polarization (Byrnes 2016), on a stack the real path takes
    rng = np.random.default_rng(7)
    n, thickness, flags = random_stack(rng, absorbing_share=0.0, slabs=0)
    out = solve(n, thickness, flags, WAVELENGTHS, angle)
    for w, wavelength in enumerate(WAVELENGTHS):
        n_list = [complex(m[w]) for m in n]
        d_list = [np.inf] + thickness + [np.inf]
        for pol in "sp":
            ref = tmm.coh_tmm(pol, n_list, d_list, np.radians(angle), wavelength)
            np.testing.assert_allclose(out["r" + pol][0, w], ref["r"], rtol=0, atol=1e-10)
            np.testing.assert_allclose(out["t" + pol][0, w], ref["t"], rtol=0, atol=1e-10)
            np.testing.assert_allclose(out["R" + pol][0, w], ref["R"], rtol=0, atol=1e-10)
            np.testing.assert_allclose(out["T" + pol][0, w], ref["T"], rtol=0, atol=1e-10)


def test_evanescent_lossless_layer_falls_back_and_matches_tmm():
    # glass ambient at 70 deg: kx = 1.41 > n = 1.2, an evanescent wave in the thin layer (frustrated total
    # internal reflection); reference tmm.coh_tmm (Byrnes 2016)
    n = [1.5, 1.2, 1.5]
    with mock.patch.object(solver, "lossless_layer_matrices", wraps=coherent.lossless_layer_matrices) as spy:
        out = solve(n, [150.0], [True], 600.0, 70.0)
    assert spy.call_count == 0
    for pol in "sp":
        ref = tmm.coh_tmm(pol, n, [np.inf, 150.0, np.inf], np.radians(70.0), 600.0)
        np.testing.assert_allclose(out["R" + pol][0, 0], ref["R"], rtol=0, atol=1e-12)
        np.testing.assert_allclose(out["r" + pol][0, 0], ref["r"], rtol=0, atol=1e-12)


def test_paths_taken():
    # the checks above compare two computations; this one makes sure they are different computations
    lossless = [1.0, 1.46, 2.2, 1.52]
    absorbing = [1.0, 1.46, 2.2 + 0.3j, 1.52]
    layers = ([80.0, 60.0], [True, True])

    def solve(*args, **kw):  # without the extra 0.01 deg pass for <eps>
        return solver.solve(*args, pseudo_dielectric=False, **kw)

    def counts():
        return real_block.call_count, normal.call_count, real_layer.call_count, general.call_count

    def spy(name):
        return mock.patch.object(solver, name, wraps=getattr(solver, name))

    with spy("lossless_block_forward") as real_block, spy("combine_normal") as normal, \
            spy("lossless_layer_matrices") as real_layer, spy("layer_matrices") as general:
        solve(lossless, *layers, WAVELENGTHS, 0.0)
        assert counts() == (1, 1, 2, 0)  # s only, real
        solve(lossless, *layers, WAVELENGTHS, [0.0, 60.0])
        assert counts() == (3, 1, 4, 0)  # s and p, real
        solve(absorbing, *layers, WAVELENGTHS, 0.0)
        assert counts() == (3, 2, 5, 1)  # the absorber complex, the other layer real, complex product
        solve(lossless, *layers, WAVELENGTHS, 0.0, fast_paths=False)
        assert counts() == (3, 2, 5, 3)


def test_lossless_layer_matrices_match_the_complex_ones():
    # phases up to ~40 rad, across multiples of pi where tan(delta/2) is huge, and zero thickness
    k0 = 2 * np.pi / np.linspace(300.0, 1000.0, 401)
    q = np.linspace(1.0, 4.0, 401)
    eps = q * q + 0.3  # an oblique-incidence q = sqrt(eps - kx^2)
    for thickness in (0.0, 37.0, 1234.5):
        real = coherent.lossless_layer_matrices(q, eps, np.array(thickness), k0)
        general = coherent.layer_matrices(q + 0j, eps + 0j, np.array(thickness), k0)
        np.testing.assert_allclose(real[0], general[0], rtol=0, atol=1e-13)
        for a_or_b, m in zip(real[1:], general[1:]):
            np.testing.assert_allclose(-1j * a_or_b, m, rtol=1e-13, atol=1e-13)
    identity = coherent.lossless_layer_matrices(q, eps, np.array(0.0), k0)
    assert np.all(identity[0] == 1.0) and all(np.all(part == 0.0) for part in identity[1:])


def test_half_angle_cos_sin_match_numpy_for_large_phases():
    # cos and sin of the real phase from tan(delta / 2) (half-angle identities) against np.cos / np.sin,
    # phases up to ~1e8 rad (a 10 mm coherent layer at 400 nm)
    rng = np.random.default_rng(3)
    k0 = 2 * np.pi / rng.uniform(300.0, 1000.0, 200_000)
    q = rng.uniform(1.0, 4.0, k0.size)
    thickness = rng.uniform(0.0, 1e7, k0.size)
    cos_d, a_s, b_s, _, _ = coherent.lossless_layer_matrices(q, None, thickness, k0, with_p=False)
    phase = (0.5 * k0 * thickness) * q * 2.0  # the same rounded phase (doubling is exact)
    np.testing.assert_allclose(cos_d, np.cos(phase), rtol=0, atol=1e-15)
    np.testing.assert_allclose(b_s / q, np.sin(phase), rtol=0, atol=1e-15)
    np.testing.assert_allclose(a_s * q, np.sin(phase), rtol=0, atol=1e-15)


def test_quantities_returns_only_the_requested_keys():
    n = [1.0, 1.46, 3.9 + 0.02j]
    full = solve(n, [100.0], [True], WAVELENGTHS, [0.0, 70.0])
    part = solve(n, [100.0], [True], WAVELENGTHS, [0.0, 70.0], quantities=["T", "psi", "eps_pseudo"])
    assert list(part) == ["T", "psi", "eps_pseudo"]
    for key in part:
        np.testing.assert_array_equal(part[key], full[key])
    assert list(solve(n, [100.0], [True], WAVELENGTHS, 0.0, quantities="R")) == ["R"]
    with pytest.raises(LaminaInputError, match="unknown quantities"):
        solve(n, [100.0], [True], WAVELENGTHS, 0.0, quantities=["R", "reflectance"])


def test_normal_incidence_outputs_are_separate_arrays():
    # the s-only path shares arrays between s and p internally; the caller gets independent ones
    out = solve([1.0, 1.46, 1.52], [90.0], [True], WAVELENGTHS, 0.0)
    assert set(out) == set(KEYS)
    out["Rp"][...] = -1.0
    out["tp"][...] = 0.0
    out["Tp"][...] = 0.0
    assert np.all(out["Rs"] > 0) and np.all(out["ts"] != 0) and np.all(out["Ts"] > 0)
    np.testing.assert_allclose(out["rp"], -out["rs"], rtol=0, atol=0)
