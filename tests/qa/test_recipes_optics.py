"""Recipe spectra and band checks against textbook results and the tmm package."""
import numpy as np
import pytest
import tmm
import xarray as xr

from lamina.dispersion.constant import Constant
from lamina.qa.recipes import (Band, RecipeEvaluator, Request, Target, band_requests, design_report,
                               measured_bands)
from lamina.qa.sensitivity import thickness_sensitivity
from lamina.stack import Layer, Stack

N_GLASS, N_MGF2 = 1.52, 1.38
#: a 4-layer broadband AR of our own design (H = 2.35, L = 1.46 on n = 1.52 glass),
#: layers from the air side down: (name, n, thickness nm)
AR4 = [("L2", 1.46, 89.7), ("H2", 2.35, 117.4), ("L1", 1.46, 35.8), ("H1", 2.35, 12.2)]


def _ar4(substrate_mm=None):
    layers = [Layer(name, Constant(n), t) for name, n, t in AR4]
    return Stack(layers, Constant(N_GLASS), substrate_thickness_mm=substrate_mm)


def _tmm_curve(pol, n_list, d_list, angle_deg, wavelengths, key="R", coherent=None):
    out = []
    for wl in wavelengths:
        if coherent is None:
            out.append(tmm.coh_tmm(pol, n_list, d_list, np.radians(angle_deg), wl)[key])
        else:
            out.append(tmm.inc_tmm(pol, n_list, d_list, coherent, np.radians(angle_deg), wl)[key])
    return np.array(out)


def test_quarter_wave_mgf2_minimum():
    # Macleod, Thin-Film Optical Filters (4th ed. 2010), sec. 4.1 (single-layer AR):
    # a quarter-wave layer of index n1 on a substrate ns gives, at the design wavelength,
    # R = ((ns - n1^2) / (ns + n1^2))^2 -- the minimum of the curve.
    design_nm = 550.0
    stack = Stack([Layer("AR", Constant(N_MGF2), design_nm / (4 * N_MGF2))], Constant(N_GLASS))
    band = Band("v", "R", (450.0, 650.0), max=0.02)
    evaluator = RecipeEvaluator(stack, band_requests(Target(bands=(band,))))
    r = evaluator.spectra()["band:v"][0]
    grid = band.grid_nm()
    expected = ((N_GLASS - N_MGF2 ** 2) / (N_GLASS + N_MGF2 ** 2)) ** 2
    assert r[grid == design_nm][0] == pytest.approx(expected, rel=1e-12)
    assert grid[np.argmin(r)] == design_nm
    report, _ = design_report(evaluator, Target(bands=(band,)))
    assert report["pass"] and report["bands"][0]["worst_margin"] == pytest.approx(0.02 - r.max(), abs=1e-15)


@pytest.mark.parametrize("angle", [0.0, 30.0, 60.0])
def test_ar4_matches_tmm(angle):
    # reference library: tmm (S. J. Byrnes, "Multilayer optical calculations", arXiv:1603.02720)
    wl = np.arange(380.0, 801.0, 5.0)
    requests = [Request(k, q, p, angle, wl) for k, q, p in
                [("R", "R", "unpolarized"), ("Rs", "R", "s"), ("Rp", "R", "p"), ("T", "T", "unpolarized"),
                 ("Tp", "T", "p"), ("As", "A", "s")]]
    spectra = RecipeEvaluator(_ar4(), requests).spectra()
    n_list = [1.0] + [n for _, n, _ in AR4] + [N_GLASS]
    d_list = [np.inf] + [t for _, _, t in AR4] + [np.inf]
    rs = _tmm_curve("s", n_list, d_list, angle, wl)
    rp = _tmm_curve("p", n_list, d_list, angle, wl)
    ts = _tmm_curve("s", n_list, d_list, angle, wl, "T")
    tp = _tmm_curve("p", n_list, d_list, angle, wl, "T")
    assert np.allclose(spectra["Rs"][0], rs, atol=1e-9, rtol=0)
    assert np.allclose(spectra["Rp"][0], rp, atol=1e-9, rtol=0)
    assert np.allclose(spectra["R"][0], (rs + rp) / 2, atol=1e-9, rtol=0)
    assert np.allclose(spectra["T"][0], (ts + tp) / 2, atol=1e-9, rtol=0)
    assert np.allclose(spectra["Tp"][0], tp, atol=1e-9, rtol=0)
    assert np.allclose(spectra["As"][0], 0.0, atol=1e-9)  # lossless stack: nothing absorbed


def test_ar4_with_glass_slab_matches_tmm_incoherent():
    # 1 mm glass slab with its backside (incoherent): tmm.inc_tmm as the reference
    wl = np.arange(400.0, 701.0, 10.0)
    spectra = RecipeEvaluator(_ar4(substrate_mm=1.0), [Request("R", "R", "unpolarized", 0.0, wl),
                                                       Request("T", "T", "unpolarized", 0.0, wl)]).spectra()
    n_list = [1.0] + [n for _, n, _ in AR4] + [N_GLASS, 1.0]
    d_list = [np.inf] + [t for _, _, t in AR4] + [1e6, np.inf]
    c_list = ["i"] + ["c"] * len(AR4) + ["i", "i"]
    assert np.allclose(spectra["R"][0], _tmm_curve("s", n_list, d_list, 0.0, wl, "R", c_list), atol=1e-9)
    assert np.allclose(spectra["T"][0], _tmm_curve("s", n_list, d_list, 0.0, wl, "T", c_list), atol=1e-9)


def test_batched_spectra_equal_one_by_one():
    band = Band("v", "R", (420.0, 680.0), step_nm=20.0, max=0.01)
    evaluator = RecipeEvaluator(_ar4(), band_requests(Target(bands=(band,))))
    rng = np.random.default_rng(3)
    thickness = evaluator.nominal_nm * (1 + 0.05 * rng.standard_normal((5, 4)))
    index = 1 + 0.01 * rng.standard_normal((5, 4))
    batched = evaluator.spectra(thickness, index)["band:v"]
    for b in range(5):
        single = evaluator.spectra(thickness[b:b + 1], index[b:b + 1])["band:v"][0]
        assert np.allclose(batched[b], single, rtol=1e-13, atol=1e-16)
    # an index scale multiplies the layer's N: compare with tmm directly for one member
    n_list = [1.0] + [n * s for (_, n, _), s in zip(AR4, index[2])] + [N_GLASS]
    ref = (_tmm_curve("s", n_list, [np.inf, *thickness[2], np.inf], 0.0, band.grid_nm()))
    assert np.allclose(batched[2], ref, atol=1e-9)


def test_sensitivity_matches_tmm_finite_difference():
    # d R / d t of each layer by central differences with tmm (step 0.5 nm, as lamina) at the wavelength
    # lamina reports; the maximum over the band must agree to round-off.
    band = Band("v", "R", (430.0, 670.0), step_nm=10.0, max=0.01)
    target = Target(bands=(band,))
    result = thickness_sensitivity(RecipeEvaluator(_ar4(), band_requests(target)), target)
    n_list = [1.0] + [n for _, n, _ in AR4] + [N_GLASS]
    grid = band.grid_nm()
    for j, (name, _, t) in enumerate(AR4):
        d_plus = [np.inf] + [tt for _, _, tt in AR4] + [np.inf]
        d_minus = list(d_plus)
        d_plus[j + 1], d_minus[j + 1] = t + 0.5, t - 0.5
        slope = (_tmm_curve("s", n_list, d_plus, 0.0, grid) - _tmm_curve("s", n_list, d_minus, 0.0, grid)) / 1.0
        entry = result["layers"][name]["bands"]["v"]
        assert entry["max_abs_derivative"] == pytest.approx(np.abs(slope).max(), rel=1e-7)
        assert entry["at_nm"] == grid[np.argmax(np.abs(slope))]
        assert entry["criticality"] == pytest.approx(entry["max_abs_derivative"] * 1.0 / 0.01)
    crit = [result["layers"][n]["criticality"] for n in result["ranking"]]
    assert crit == sorted(crit, reverse=True)


def test_measured_bands_use_points_inside_band():
    wl = np.arange(400.0, 701.0, 50.0)
    r = np.array([0.02, 0.004, 0.003, 0.006, 0.002, 0.001, 0.03])
    data = xr.Dataset({"R": (("angle", "wavelength"), r[None, :])}, coords={"angle": [0.0], "wavelength": wl})
    bands = (Band("vis", "R", (450.0, 650.0), max=0.005), Band("ob", "R", (450.0, 650.0), angle_deg=45.0, max=0.1),
             Band("t", "T", (450.0, 650.0), min=0.9))
    out = measured_bands(data, Target(bands=bands))
    assert out[0]["pass"] is False and out[0]["at_nm"] == 550.0
    assert out[0]["worst_margin"] == pytest.approx(-0.001)
    assert out[0]["points"] == 5
    assert out[1]["pass"] is None and "not measured" in out[1]["reason"]
    assert out[2]["pass"] is None


@pytest.mark.parametrize("n, k, wavelength, psi, delta", [
    (0.2, 3.3, 632.8, 43.46, 106.18),    # bare absorbing substrate at 70 deg (team convention values)
    (3.882, 0.019, 632.8, 10.57, 179.23),  # bare Si at 70 deg, 632.8 nm (team convention values)
])
def test_psi_delta_bands_of_a_bare_substrate(n, k, wavelength, psi, delta):
    # values given with the project's conventions (rho = rp/rs = tan Psi exp(i Delta)), from memory of the
    # usual Fresnel result; cross-checked against tmm.ellips with Delta_lamina = 180 - Delta_tmm (mod 360)
    stack = Stack([Layer("none", Constant(1.5), 0.0)], Constant(n, k))
    bands = (Band("psi", "psi", (wavelength, wavelength), angle_deg=70.0, min=psi - 0.5, max=psi + 0.5),
             Band("delta", "delta", (wavelength, wavelength), angle_deg=70.0, min=delta - 0.5, max=delta + 0.5))
    spectra = RecipeEvaluator(stack, band_requests(Target(bands=bands))).spectra()
    got_psi, got_delta = spectra["band:psi"][0, 0], spectra["band:delta"][0, 0]
    assert got_psi == pytest.approx(psi, abs=0.01) and got_delta == pytest.approx(delta, abs=0.01)
    ref = tmm.ellips([1.0, n + 1j * k], [np.inf, np.inf], np.radians(70.0), wavelength)
    assert got_psi == pytest.approx(np.degrees(ref["psi"]), abs=1e-9)
    assert got_delta == pytest.approx((180.0 - np.degrees(ref["Delta"])) % 360.0, abs=1e-9)
    report, _ = design_report(RecipeEvaluator(stack, band_requests(Target(bands=bands))), Target(bands=bands))
    assert report["pass"] and report["bands"][0]["worst_margin"] == pytest.approx(0.5 - abs(got_psi - psi))
