"""Psi/Delta-only and reflection-only requests (``quantities=``) skip work, not accuracy.

With ``quantities=("psi", "delta")`` the solver takes Psi and Delta straight
from the sums R_s, R_p, X (no Mueller normalisation, no degree of
polarization) and skips the transmission side; it must give the numbers of a
full request to round-off on random stacks (transparent, absorbing, with thick
incoherent slabs, at normal and oblique incidence, batched), fall back to the
dark-point limit where nothing is reflected, and agree with the tmm package
(Byrnes, "Multilayer optical calculations", arXiv:1603.02720, 2016;
tmm.ellips, whose Delta is converted by delta_from_tmm).
"""
import numpy as np
import pytest
import tmm

from lamina.optics import delta_from_tmm, solve
from lamina.optics.ellipsometry import _wrap_half_turn, psi_delta_from_sums, wrap_delta_deg

WAVELENGTHS = np.linspace(350.0, 900.0, 31)
ANGLES = np.array([0.0, 45.0, 65.0, 70.0, 75.0])


def make_stack(rng, *, slabs, batch=None):
    """Indices per medium ((W,) or (batch, W)), thicknesses (nm), coherence flags: invented test stacks."""
    n = [np.full(WAVELENGTHS.size, 1.0 + 0j)]
    thickness, flags = [], []
    for _ in range(int(rng.integers(1, 5))):
        k = rng.uniform(0.0, 0.8) if rng.random() < 0.5 else 0.0
        index = complex(rng.uniform(1.3, 3.2), k) * (1 + 0.05 * (450 / WAVELENGTHS - 1))
        thick = float(rng.uniform(0.0, 400.0))
        if batch is not None:
            index = index[None, :] * (1 + 0.01 * rng.standard_normal(batch))[:, None]
            thick = thick * (1 + 0.02 * rng.standard_normal(batch)).clip(0)
        n.append(index)
        thickness.append(thick)
        flags.append(True)
    for _ in range(slabs):
        pos = int(rng.integers(0, len(thickness) + 1))
        n.insert(pos + 1, np.full(WAVELENGTHS.size, complex(rng.uniform(1.4, 3.5), rng.choice([0.0, 1e-6]))))
        thickness.insert(pos, float(rng.uniform(2e4, 1e6)))
        flags.insert(pos, False)
    n.append(np.full(WAVELENGTHS.size, complex(rng.uniform(1.4, 4.0), rng.choice([0.0, 0.02, 3.0]))))
    return n, thickness, flags


def delta_difference(a, b):
    return wrap_delta_deg(a - b + 180.0) - 180.0


@pytest.mark.parametrize("slabs", [0, 1, 2])
@pytest.mark.parametrize("batch", [None, 4])
def test_subsets_equal_the_full_request(slabs, batch):
    rng = np.random.default_rng(11 + slabs + (batch or 0))
    for _ in range(6):
        n, thickness, flags = make_stack(rng, slabs=slabs, batch=batch)
        for angles in (ANGLES, np.array([0.0]), np.array([70.0])):
            full = solve(n, thickness, flags, WAVELENGTHS, angles)
            for wanted in (("psi", "delta"), ("delta",), ("psi", "R"), ("Rs", "Rp"), ("rs", "rp", "psi"),
                           ("T",), ("ts", "tp", "delta"), ("A", "psi")):
                part = solve(n, thickness, flags, WAVELENGTHS, angles, quantities=wanted)
                assert list(part) == [key for key in full if key in wanted]
                for key in wanted:
                    assert part[key].shape == full[key].shape
                    if key == "delta":
                        np.testing.assert_allclose(delta_difference(part[key], full[key]), 0.0, atol=1e-10)
                    else:
                        np.testing.assert_allclose(part[key], full[key], rtol=1e-12, atol=1e-13, err_msg=key)
                assert np.all((part.get("delta", 0.0) >= 0.0) & (part.get("delta", 0.0) < 360.0))


def test_psi_delta_only_against_tmm():
    # air / absorbing film 40 nm / transparent film 120 nm / absorbing substrate (invented values)
    n_list = [1.0, 2.1 + 0.3j, 1.46, 3.9 + 0.02j]
    d_list = [np.inf, 40.0, 120.0, np.inf]
    angles = np.array([55.0, 70.0, 75.0])
    out = solve([np.full(WAVELENGTHS.size, n) for n in n_list], d_list[1:-1], [True, True], WAVELENGTHS,
                angles, quantities=("psi", "delta"))
    for a, angle in enumerate(angles):
        for w, wavelength in enumerate(WAVELENGTHS):
            ell = tmm.ellips(n_list, d_list, np.radians(angle), wavelength)  # Byrnes 2016, tmm.ellips
            assert abs(out["psi"][a, w] - np.degrees(ell["psi"])) < 1e-10
            assert abs(delta_difference(out["delta"][a, w], delta_from_tmm(ell["Delta"]))) < 1e-10


def test_bare_absorbing_substrate_values():
    # the team's reference values (N = 0.2 + 3.3i at 70 deg: Psi = 43.46, Delta = 106.18; common practice)
    out = solve([np.array([1.0]), np.array([0.2 + 3.3j])], [], [], 500.0, 70.0, quantities=("psi", "delta"))
    assert out["psi"][0, 0] == pytest.approx(43.46, abs=0.005)
    assert out["delta"][0, 0] == pytest.approx(106.18, abs=0.005)


def test_dark_points_fall_back_to_the_limit():
    # index-matched ambient: nothing reflected, Psi/Delta take the limit rho -> -cos 2 theta (ellipsometry.py)
    n = [np.full(3, 1.5 + 0j), np.full(3, 1.5 + 0j)]
    part = solve(n, [], [], [400.0, 500.0, 600.0], [0.0, 60.0], quantities=("psi", "delta"))
    full = solve(n, [], [], [400.0, 500.0, 600.0], [0.0, 60.0])
    np.testing.assert_array_equal(part["psi"], full["psi"])
    np.testing.assert_array_equal(part["delta"], full["delta"])
    assert psi_delta_from_sums(np.zeros(2), np.zeros(2), np.zeros(2, complex)) is None
    assert psi_delta_from_sums(np.array([np.nan]), np.array([0.1]), np.array([0.1j])) is None


def test_half_turn_wrap_equals_the_general_wrap():
    edge = np.array([-0.0, 0.0, -1e-17, -1e-300, -180.0, 180.0, -179.999999, 179.999999, 90.0, -90.0])
    angles = np.concatenate([edge, np.random.default_rng(3).uniform(-180.0, 180.0, 1000)])
    expected = wrap_delta_deg(angles)
    got = _wrap_half_turn(angles.copy())
    np.testing.assert_array_equal(got, expected)
    np.testing.assert_array_equal(np.signbit(got), np.signbit(expected))  # no -0.0
