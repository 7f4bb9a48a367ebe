"""Several samples fitted together: shared optical constants, a thickness of their own each."""
import numpy as np
import pytest

import lamina
from lamina.dispersion import Cauchy, Constant
from lamina.errors import LaminaInputError
from lamina.fit.samples import Sample, parse_samples
from lamina.parameters import Param
from lamina.stack import Layer, Stack

SI = 3.882 + 0.019j      # convention anchor of DEVELOPERS.md (from memory, ~Green 2008)
A_TRUE, B_TRUE = 1.452, 0.0036   # Cauchy n = A + B / lambda^2 (lambda in um), a thermal-oxide-like film
THICKNESSES = {"w1": 60.0, "w2": 150.0, "w3": 420.0}


def cauchy_n(wl_nm):
    # Cauchy's formula n = A + B / lambda^2 (e.g. Born and Wolf, Principles of Optics, sec. 2.3)
    return A_TRUE + B_TRUE / (np.asarray(wl_nm) / 1000.0) ** 2


@pytest.fixture(scope="module")
def wafer_data(tmm_data):
    out = {}
    for seed, (name, t) in enumerate(THICKNESSES.items()):
        out[name] = tmm_data.ellipsometry([lambda wl: np.ones_like(wl), lambda wl: cauchy_n(wl) + 0j,
                                           lambda wl: np.full_like(wl, SI, dtype=complex)],
                                          [t], (70.0,), np.linspace(350, 900, 23), sigma_psi=0.02,
                                          sigma_delta=0.05, rng=np.random.default_rng(40 + seed), label=f"{name}.csv")
    return out


def base_stack(samples=None):
    film = Cauchy(A=Param(1.47, 1.3, 1.7, vary=True), B_um2=Param(0.002, 0.0, 0.02, vary=True))
    stack = Stack([Layer("oxide", film, Param(100.0, 0.0, 600.0, vary=True, unit="nm"))], Constant(SI.real, SI.imag))
    if samples is not None:
        stack.extras["samples"] = samples
    return stack


def raw_samples():
    return [{"name": name, "data": f"{name}.csv",
             "overrides": {"oxide.thickness_nm": {"value": start, "min": 0.0, "max": 600.0}}}
            for name, start in zip(THICKNESSES, (55.0, 145.0, 410.0))]


def test_joint_fit_recovers_shared_constants_better_than_single(wafer_data):
    joint = lamina.fit(base_stack(raw_samples()), wafer_data)
    assert joint.success, joint.message
    # sample parameters are named <sample>.<full name>; the shared ones keep their plain names
    assert set(joint.parameters) == {"oxide.material.A", "oxide.material.B_um2", "w1.oxide.thickness_nm",
                                     "w2.oxide.thickness_nm", "w3.oxide.thickness_nm"}
    for name, true_nm in THICKNESSES.items():
        entry = joint.parameters[f"{name}.oxide.thickness_nm"]
        assert abs(entry["value"] - true_nm) < 3 * entry["stderr"]
    joint_a = joint.parameters["oxide.material.A"]
    assert abs(joint_a["value"] - A_TRUE) < 3 * joint_a["stderr"]
    # the same wafers one by one: the shared constant is less well determined in each
    for name, true_nm in THICKNESSES.items():
        single_stack = base_stack()
        single_stack = single_stack.with_params({"oxide.thickness_nm": Param(true_nm * 0.95, 0.0, 600.0, vary=True)})
        single = lamina.fit(single_stack, wafer_data[name])
        assert joint_a["stderr"] < single.parameters["oxide.material.A"]["stderr"]
    # fitted sample values are written back into the stack's samples (for fitted.toml)
    fitted_raw = {s["name"]: s for s in joint.stack.extras["samples"]}
    assert fitted_raw["w2"]["overrides"]["oxide.thickness_nm"]["value"] == pytest.approx(
        joint.parameters["w2.oxide.thickness_nm"]["value"])
    assert set(joint.points["sample"]) == set(THICKNESSES)


def test_list_of_datasets_is_taken_in_sample_order(wafer_data):
    joint = lamina.fit(base_stack(raw_samples()), [wafer_data[n] for n in THICKNESSES])
    assert joint.success
    for name, true_nm in THICKNESSES.items():
        assert joint.value(f"{name}.oxide.thickness_nm") == pytest.approx(true_nm, abs=1.0)


def test_explicit_samples_argument(wafer_data):
    samples = [Sample(name, {"oxide.thickness_nm": Param(THICKNESSES[name] + 5, 0.0, 600.0, vary=True)})
               for name in ("w1", "w3")]
    result = lamina.fit(base_stack(), {n: wafer_data[n] for n in ("w1", "w3")}, samples=samples)
    assert "w3.oxide.thickness_nm" in result.parameters and "w2.oxide.thickness_nm" not in result.parameters
    # overridden in every sample: the shared thickness is not a fit parameter
    assert "oxide.thickness_nm" not in result.parameters


@pytest.mark.parametrize("samples, message", [
    ([{"name": "w1", "overrides": {"oxide.nope": 1.0}}], "unknown parameter 'oxide.nope'"),
    ([{"name": "oxide"}], "clashes"),
    ([{"name": "w1"}, {"name": "w1"}], "clashes"),
    ([{"name": "w1", "colour": "red"}], "unknown key 'colour'"),
    ([{"name": "w1", "overrides": {"oxide.thickness_nm": {"value": -5.0}}}], "outside"),
    ("w1", "not a list"),
])
def test_bad_samples_are_input_errors(samples, message):
    with pytest.raises(LaminaInputError, match=message):
        parse_samples(base_stack(samples))


def test_wrong_number_of_datasets(wafer_data):
    with pytest.raises(LaminaInputError, match="2 data sets for 3 samples"):
        lamina.fit(base_stack(raw_samples()), [wafer_data["w1"], wafer_data["w2"]])


def test_sample_stack_carries_the_sample_thickness(wafer_data):
    joint = lamina.fit(base_stack(raw_samples()), wafer_data)
    w3 = joint.sample_stack("w3")
    assert w3.layer("oxide").thickness_nm.value == pytest.approx(joint.value("w3.oxide.thickness_nm"))
    assert w3.layer("oxide").material.params["A"].value == pytest.approx(joint.value("oxide.material.A"))
