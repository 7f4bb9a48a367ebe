"""Drift diagnosis: a thickness error injected into one layer is found and named first."""
import numpy as np
import pytest
import tmm
import xarray as xr

from lamina.dispersion.constant import Constant
from lamina.qa.drift import diagnose_drift, prefit_scale
from lamina.stack import Layer, Stack

#: 4-layer AR of our own design (constant indices), air side first: (name, n, thickness nm)
AR4 = [("L2", 1.46, 89.7), ("H2", 2.35, 117.4), ("L1", 1.46, 35.8), ("H1", 2.35, 12.2)]
N_GLASS = 1.52
NOISE = 0.0005
WAVELENGTHS = np.arange(380.0, 1001.0, 4.0)


def _recipe():
    return Stack([Layer(n, Constant(i), t) for n, i, t in AR4], Constant(N_GLASS))


def _measurement(factors, seed=11):
    """Normal-incidence R of the AR with thickness factors per layer, from tmm (Byrnes), plus noise."""
    n_list = [1.0] + [i for _, i, _ in AR4] + [N_GLASS]
    d_list = [np.inf] + [t * f for (_, _, t), f in zip(AR4, factors)] + [np.inf]
    r = np.array([tmm.coh_tmm("s", n_list, d_list, 0.0, wl)["R"] for wl in WAVELENGTHS])
    r = r + np.random.default_rng(seed).normal(0.0, NOISE, r.shape)
    return xr.Dataset({"R": (("angle", "wavelength"), r[None, :]),
                       "R_err": (("angle", "wavelength"), np.full((1, r.size), NOISE))},
                      coords={"angle": [0.0], "wavelength": WAVELENGTHS})


@pytest.mark.parametrize("layer", ["H2", "L1"])
def test_five_percent_error_is_recovered_and_named_first(layer):
    factors = [1.05 if name == layer else 1.0 for name, _, _ in AR4]
    result = diagnose_drift(_recipe(), _measurement(factors))
    drift = result["drift"]
    assert list(drift)[0] == f"{layer}.thickness_nm" == result["largest"]
    row = drift[f"{layer}.thickness_nm"]
    assert row["delta_pct"] == pytest.approx(5.0, abs=0.5)
    assert row["fitted"] == pytest.approx(row["design"] * 1.05, abs=max(4 * row["stderr"], 0.3))
    assert row["delta_nm"] == pytest.approx(row["fitted"] - row["design"])
    for name, other in drift.items():
        if name != f"{layer}.thickness_nm":
            assert abs(other["delta_pct"]) < 1.5
    pcts = [abs(r["delta_pct"]) for r in drift.values()]
    assert pcts == sorted(pcts, reverse=True)


def test_common_scale_prefit_finds_a_uniform_run_error():
    scale = prefit_scale(_recipe(), _measurement([1.03] * 4))
    assert scale == pytest.approx(1.03, abs=0.003)
