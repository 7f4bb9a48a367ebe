"""Property checks of lamina.optics.solve over random stacks (hypothesis).

- Reciprocity: with the same medium on both sides, a stack transmits the same
  fraction of light from either side, for s and p, coherent or not (Stokes
  relations / Lorentz reciprocity; common practice).
- Bounds: 0 <= R, T, A <= 1 (passive media), 0 <= Psi <= 90, 0 <= Delta < 360,
  0 <= P <= 1 (common practice).
"""
import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from lamina.optics import solve

WAVELENGTHS = np.array([320.0, 555.0, 990.0])

medium = st.tuples(st.floats(1.1, 4.0), st.sampled_from([0.0, 0.0, 1e-3, 0.05, 0.8, 3.0]))
layer = st.tuples(medium, st.floats(0.0, 500.0), st.booleans())


def build(layers, substrate_like_exit):
    n = [1.0 + 0j]
    thickness, coherent = [], []
    for (n_re, k), d, incoherent in layers:
        n.append(complex(n_re, k))
        if incoherent:
            thickness.append(2e5 + 1e3 * d)  # thick slab, 0.2-0.7 mm
            coherent.append(False)
        else:
            thickness.append(d)
            coherent.append(True)
    n.append(substrate_like_exit)
    return n, thickness, coherent


@settings(max_examples=60, deadline=None)
@given(st.lists(layer, min_size=0, max_size=6), st.floats(0.0, 85.0))
def test_transmittance_is_reciprocal(layers, angle):
    n, thickness, coherent = build(layers, 1.0 + 0j)
    forward = solve(n, thickness, coherent, WAVELENGTHS, angle)
    backward = solve(n[::-1], thickness[::-1], coherent[::-1], WAVELENGTHS, angle)
    for key in ("Ts", "Tp"):
        np.testing.assert_allclose(forward[key], backward[key], rtol=1e-8, atol=1e-13, err_msg=key)


@settings(max_examples=60, deadline=None)
@given(st.lists(layer, min_size=0, max_size=6), st.floats(0.0, 89.0), medium)
def test_outputs_stay_in_their_ranges(layers, angle, exit_medium):
    n, thickness, coherent = build(layers, complex(*exit_medium))
    out = solve(n, thickness, coherent, WAVELENGTHS, angle)
    for key in ("R", "T", "A", "Rs", "Rp", "Ts", "Tp"):
        assert np.all(out[key] >= -1e-12) and np.all(out[key] <= 1 + 1e-12), key
    assert np.all((out["psi"] >= 0) & (out["psi"] <= 90))
    assert np.all((out["delta"] >= 0) & (out["delta"] < 360))
    assert np.all((out["P"] >= 0) & (out["P"] <= 1))
    assert all(np.all(np.isfinite(v)) for v in out.values())
