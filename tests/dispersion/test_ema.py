"""Effective-medium mixtures: Bruggeman and Maxwell Garnett."""
import itertools

import numpy as np
import pytest

from lamina.dispersion import Bruggeman, Constant, Lorentz, MaxwellGarnett, Sellmeier, from_toml
from lamina.dispersion.ema import bruggeman_epsilon, bruggeman_many, bruggeman_two, maxwell_garnett_epsilon
from lamina.errors import LaminaInputError

RNG = np.random.default_rng(1935)


def random_eps(size, lossy=True):
    eps1 = RNG.uniform(-20, 20, size)
    eps2 = RNG.uniform(0.01, 10, size) if lossy else np.zeros(size)
    return eps1 + 1j * eps2


def bruggeman_residual(eps, eps_list, fractions):
    # sum_i f_i (eps_i - eps) / (eps_i + 2 eps) = 0 (Bruggeman 1935; Aspnes 1982)
    return sum(f * (e - eps) / (e + 2 * eps) for e, f in zip(eps_list, fractions))


def test_pure_components_at_fraction_zero_and_one():
    a, b = random_eps(50), random_eps(50)
    np.testing.assert_allclose(bruggeman_two(a, b, 1.0), a, rtol=1e-10)
    np.testing.assert_allclose(bruggeman_two(a, b, 0.0), b, rtol=1e-10)
    np.testing.assert_allclose(maxwell_garnett_epsilon(b, [a], [0.0]), b, rtol=1e-12)
    np.testing.assert_allclose(maxwell_garnett_epsilon(b, [a], [1.0]), a, rtol=1e-12)
    c = random_eps(50)
    np.testing.assert_allclose(bruggeman_many([a, b, c], [0.0, 1.0, 0.0]), b, rtol=1e-8)


def test_bruggeman_solves_its_equation_with_physical_root():
    for count in (2, 3, 4):
        eps_list = [random_eps(200) for _ in range(count)]
        raw = RNG.uniform(0, 1, (count, 200))
        fractions = list(raw / raw.sum(axis=0))
        eps = bruggeman_epsilon(eps_list, fractions)
        assert np.abs(bruggeman_residual(eps, eps_list, fractions)).max() < 1e-8
        assert np.all(eps.imag >= -1e-12)


def test_bruggeman_is_symmetric_in_its_components():
    eps_list = [random_eps(100) for _ in range(3)]
    fractions = [np.full(100, 0.2), np.full(100, 0.5), np.full(100, 0.3)]
    reference = bruggeman_epsilon(eps_list, fractions)
    for order in itertools.permutations(range(3)):
        np.testing.assert_allclose(bruggeman_epsilon([eps_list[i] for i in order], [fractions[i] for i in order]),
                                   reference, rtol=1e-9)
    a, b = eps_list[:2]
    np.testing.assert_allclose(bruggeman_two(a, b, 0.3), bruggeman_two(b, a, 0.7), rtol=1e-12)


def test_two_component_closed_form_agrees_with_the_general_solver():
    a, b = random_eps(100), random_eps(100)
    f = RNG.uniform(0, 1, 100)
    np.testing.assert_allclose(bruggeman_many([a, b], [f, 1 - f]), bruggeman_two(a, b, f), rtol=1e-9)
    # a component split in two identical halves changes nothing
    np.testing.assert_allclose(bruggeman_many([a, a, b], [f / 2, f / 2, 1 - f]), bruggeman_two(a, b, f), rtol=1e-8)


def test_root_is_continuous_in_the_fraction():
    # the chosen root follows the pure component continuously (Newton continuation from f = 0)
    a, b = random_eps(40), random_eps(40)
    eps = b.copy()
    for f in np.linspace(0, 1, 201)[1:]:
        for _ in range(20):   # Newton on F(eps) = f (a - eps)/(a + 2 eps) + (1 - f)(b - eps)/(b + 2 eps)
            g = f * (a - eps) / (a + 2 * eps) + (1 - f) * (b - eps) / (b + 2 * eps)
            dg = -3 * f * a / (a + 2 * eps) ** 2 - 3 * (1 - f) * b / (b + 2 * eps) ** 2
            eps = eps - g / dg
        np.testing.assert_allclose(bruggeman_two(a, b, f), eps, rtol=1e-6)


def test_lossless_dielectrics_mix_between_their_values():
    # Wiener bounds: a lossless two-phase mixture lies between series and parallel averages
    # (Aspnes, Am. J. Phys. 50, 704 (1982))
    a, b = np.full(11, 2.1 + 0j), np.full(11, 1.0 + 0j)
    f = np.linspace(0, 1, 11)
    eps = bruggeman_two(a, b, f).real
    series = 1 / (f / 2.1 + (1 - f) / 1.0)
    parallel = f * 2.1 + (1 - f) * 1.0
    assert np.all(eps >= series - 1e-12) and np.all(eps <= parallel + 1e-12)


def test_bruggeman_and_maxwell_garnett_agree_for_dilute_inclusions():
    # to first order in f both give eps_h + 3 f eps_h (eps_i - eps_h)/(eps_i + 2 eps_h)
    # (Aspnes, Thin Solid Films 89, 249 (1982)): their difference, and each one's distance from
    # that first-order form, shrink as f^2 (a tenth of f -> a hundredth of the difference)
    host = RNG.uniform(1.5, 6, 100) + 1j * RNG.uniform(0, 1, 100)
    incl = random_eps(100)

    def gaps(f):
        first_order = host + 3 * f * host * (incl - host) / (incl + 2 * host)
        br = bruggeman_two(incl, host, f)
        mg = maxwell_garnett_epsilon(host, [incl], [f])
        return np.abs(br - mg), np.abs(br - first_order), np.abs(mg - first_order), np.abs(br - host)

    coarse, fine = gaps(1e-3), gaps(1e-4)
    for big, small in zip(coarse[:3], fine[:3]):
        ratio = big / small
        assert np.all((ratio > 70) & (ratio < 130))
    # and the agreement is good in absolute terms: within 5 % of the change the inclusions make
    # (the largest gaps sit near the dipole resonance eps_i = -2 eps_h)
    assert np.all(fine[0] < 5e-2 * fine[3])


ROUGH = {"law": "bruggeman",
         "components": [{"material": {"law": "sellmeier", "terms": [{"B": 1.1, "C_um2": 0.01}]}},
                        {"material": {"law": "constant", "n": 1.0}}],
         "fractions": [0.5]}


def test_law_names_evaluation_and_round_trip():
    law = from_toml(ROUGH, "rough.material")
    assert list(law.params) == ["fractions.1", "components.1.material.terms.1.B",
                                "components.1.material.terms.1.C_um2", "components.2.material.n",
                                "components.2.material.k"]
    wl = np.array([400.0, 633.0])
    film = Sellmeier([{"B": 1.1, "C_um2": 0.01}]).epsilon(wl)
    np.testing.assert_allclose(law.epsilon(wl), bruggeman_two(film, np.ones(2), 0.5))
    batch = law.epsilon(wl, {"fractions.1": np.array([0.0, 0.5, 1.0])})
    np.testing.assert_allclose(batch[0], 1.0, atol=1e-12)
    np.testing.assert_allclose(batch[2], film, rtol=1e-10)
    assert from_toml(law.to_toml(), "x").params == law.params
    mg = from_toml({**ROUGH, "law": "maxwell_garnett"}, "m")
    np.testing.assert_allclose(mg.epsilon(wl), maxwell_garnett_epsilon(np.ones(2), [film], [0.5]))


def test_library_names_stay_names_in_to_toml():
    library = {"film": Sellmeier([{"B": 1.1, "C_um2": 0.01}], name="film"), "void": Constant(1.0, name="void")}

    def resolve(raw, where):
        if isinstance(raw, str):
            return library[raw].copy()
        return from_toml(raw, where, resolve)

    table = {"law": "bruggeman", "components": [{"material": "film"}, {"material": "void"}], "fractions": [0.3]}
    law = from_toml(table, "rough.material", resolve)
    assert law.to_toml() == table
    edited = law.with_values({"components.1.material.terms.1.B": 1.2}).to_toml()
    assert edited["components"][0]["material"]["terms"][0]["B"] == 1.2


@pytest.mark.parametrize("fractions, where", [([1.2], "rough.material.fractions.1"),
                                              ([-0.1], "rough.material.fractions.1")])
def test_fraction_outside_zero_one_is_named(fractions, where):
    with pytest.raises(LaminaInputError) as err:
        from_toml({**ROUGH, "fractions": fractions}, "rough.material")
    assert err.value.where == where


def test_fraction_errors_at_evaluation_and_sums():
    law = from_toml(ROUGH, "rough.material")
    with pytest.raises(LaminaInputError) as err:
        law.epsilon(np.array([500.0]), {"fractions.1": np.array([0.5, 1.5])})
    assert err.value.where == "fractions.1"
    three = {"law": "bruggeman", "components": [ROUGH["components"][0]] * 2 + [ROUGH["components"][1]],
             "fractions": [0.7, 0.6]}
    with pytest.raises(LaminaInputError) as err:
        from_toml(three, "rough.material")
    assert err.value.where == "rough.material.fractions" and "1.3" in str(err.value)
    with pytest.raises(LaminaInputError) as err:
        from_toml({**ROUGH, "fractions": [0.5, 0.5]}, "rough.material")
    assert err.value.where == "rough.material.fractions"
    with pytest.raises(LaminaInputError) as err:
        from_toml({**ROUGH, "components": [{"material": "SiO2"}, {"material": "void"}]}, "rough.material")
    assert err.value.where == "rough.material.components.1.material"


def test_valid_range_is_the_common_range():
    from lamina.dispersion import Table
    table = Table([300.0, 900.0], [1.5, 1.5], [0.0, 0.0])
    law = Bruggeman([table, Constant(1.0)], [0.5])
    assert law.valid_range_nm == (300.0, 900.0)
    with pytest.raises(LaminaInputError):
        law.nk(np.array([250.0]))
    lorentz = Lorentz(1.0, [{"amplitude": 1.0, "center_ev": 8.0, "broadening_ev": 0.1}])
    assert MaxwellGarnett([lorentz, Constant(1.5)], [0.1]).valid_range_nm is None
