"""The Delta conversion used by the tmm-based test data agrees with the convention anchors and lamina's own."""
import numpy as np
import pytest
import tmm


def test_conversion_reproduces_convention_anchors(tmm_data):
    # anchors of DEVELOPERS.md: bare N = 0.2 + 3.3i at 70 deg -> Psi 43.46, Delta 106.18;
    # bare Si N = 3.882 + 0.019i at 70 deg, 632.8 nm -> Psi 10.57, Delta 179.23 (Delta < 180: absorbing)
    for index, psi, delta in [(0.2 + 3.3j, 43.46, 106.18), (3.882 + 0.019j, 10.57, 179.23)]:
        res = tmm.ellips([1.0, index], [np.inf, np.inf], np.radians(70.0), 632.8)
        assert np.degrees(res["psi"]) == pytest.approx(psi, abs=0.01)
        assert tmm_data.delta_from_tmm_deg(res["Delta"]) == pytest.approx(delta, abs=0.01)


def test_transparent_substrate_below_and_above_brewster(tmm_data):
    # bare glass n = 1.5: Delta = 180 below Brewster's angle (56.31 deg), 0 above (Azzam and Bashara 1977)
    below = tmm.ellips([1.0, 1.5], [np.inf, np.inf], np.radians(45.0), 600.0)
    above = tmm.ellips([1.0, 1.5], [np.inf, np.inf], np.radians(70.0), 600.0)
    assert tmm_data.delta_from_tmm_deg(below["Delta"]) == pytest.approx(180.0, abs=1e-9)
    assert np.cos(np.radians(tmm_data.delta_from_tmm_deg(above["Delta"]))) == pytest.approx(1.0, abs=1e-12)


def test_agrees_with_lamina_optics_conversion(tmm_data):
    optics = pytest.importorskip("lamina.optics")
    if not hasattr(optics, "delta_from_tmm"):
        pytest.skip("lamina.optics.delta_from_tmm not available")
    angles = np.radians(np.linspace(-170, 170, 35))
    ours = tmm_data.delta_from_tmm_deg(angles)
    theirs = np.asarray(optics.delta_from_tmm(angles))
    assert np.allclose(np.cos(np.radians(ours - theirs)), 1.0, atol=1e-12)
