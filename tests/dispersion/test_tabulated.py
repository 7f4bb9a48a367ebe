"""The `table` law: interpolation, range, CSV files."""
from types import SimpleNamespace

import numpy as np
import pytest

from lamina.dispersion import Table, from_toml
from lamina.errors import LaminaInputError
from lamina.units import HC_EV_NM

WL = [400.0, 500.0, 650.0, 800.0]
N = [1.60, 1.55, 1.52, 1.50]
K = [0.10, 0.02, 0.0, 0.0]


def test_nodes_come_back_unchanged():
    law = Table(WL, N, K)
    np.testing.assert_allclose(law.nk(np.array(WL)), np.array(N) + 1j * np.array(K), rtol=1e-14)


def test_interpolation_is_linear_in_photon_energy():
    # documented choice: n and k linear in E between nodes (common practice)
    law = Table(WL, N, K)
    e_lo, e_hi = HC_EV_NM / 500.0, HC_EV_NM / 400.0
    e_mid = 0.5 * (e_lo + e_hi)
    nk = law.nk(np.array([HC_EV_NM / e_mid]))[0]
    assert nk.real == pytest.approx(0.5 * (1.60 + 1.55), abs=1e-12)
    assert nk.imag == pytest.approx(0.5 * (0.10 + 0.02), abs=1e-12)


def test_outside_the_table_is_an_input_error():
    law = Table(WL, N, K, name="film-nk")
    assert law.valid_range_nm == (400.0, 800.0)
    with pytest.raises(LaminaInputError) as err:
        law.nk(np.array([390.0, 500.0]))
    assert "film-nk" in str(err.value) and "400-800" in str(err.value)


def test_unsorted_input_is_sorted_and_duplicates_rejected():
    law = Table(WL[::-1], N[::-1], K[::-1])
    np.testing.assert_allclose(law.wavelength_nm, WL)
    with pytest.raises(LaminaInputError) as err:
        Table([400, 400, 500], [1, 1, 1], [0, 0, 0])
    assert "twice" in str(err.value)
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "table", "wavelength_nm": WL, "n": N, "k": [0.1, -0.02, 0, 0]}, "f.material")
    assert err.value.where == "f.material.k" and "row 2" in str(err.value)


def test_csv_file_relative_to_base_dir_and_round_trip(tmp_path):
    folder = tmp_path / "nk"
    folder.mkdir()
    (folder / "film.csv").write_text("# film n, k (demo values)\nwavelength_nm,n,k\n"
                                     + "".join(f"{w},{n},{k}\n" for w, n, k in zip(WL, N, K)))
    resolver = SimpleNamespace(base_dir=tmp_path)
    law = from_toml({"law": "table", "file": "nk/film.csv"}, "film.material", resolver)
    np.testing.assert_allclose(law.nk(np.array(WL)), np.array(N) + 1j * np.array(K))
    assert law.to_toml() == {"law": "table", "file": "nk/film.csv"}
    inline = Table(WL, N, K)
    again = from_toml(inline.to_toml(), "x")
    np.testing.assert_allclose(again.nk(np.array([450.0, 700.0])), inline.nk(np.array([450.0, 700.0])))


def test_csv_errors_name_file_and_line(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text("wavelength_nm,n,k\n400,1.5,0\n500,abc,0\n")
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "table", "file": str(path)}, "film.material")
    assert err.value.where.endswith("bad.csv:3")
    path.write_text("400,1.5,0\n500,1.4,-1\n")
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "table", "file": str(path)}, "film.material")
    assert err.value.where.endswith("bad.csv:2")
    with pytest.raises(LaminaInputError) as err:
        from_toml({"law": "table", "file": "missing.csv"}, "film.material", SimpleNamespace(base_dir=tmp_path))
    assert "not found" in str(err.value)
    before = path.read_text()
    with pytest.raises(LaminaInputError):
        from_toml({"law": "table", "file": str(path), "n": [1, 2]}, "film.material")
    assert path.read_text() == before   # input files are never changed


def test_no_silent_clamping_on_the_energy_path():
    # epsilon_ev (used by mixtures and the optics) refuses energies outside the table too
    law = Table(WL, N, K, name="film-nk")
    with pytest.raises(LaminaInputError):
        law.epsilon_ev(np.array([HC_EV_NM / 1000.0]))
    np.testing.assert_allclose(law.epsilon_ev(np.array([HC_EV_NM / 500.0])), (1.55 + 0.02j) ** 2)
