"""Model files: parsing, validation messages, round trips through save_model/load_model."""
from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest

import lamina
from lamina.errors import LaminaInputError
from lamina.stack.modelfile import dumps_toml, load_model, model_from_text, save_model

OXIDE_FILM = """
name = "oxide and film"
[ambient]
material = "air"
[[layers]]
name = "oxide"
thickness_nm = { value = 100.0, min = 0.0, max = 500.0 }
material = { law = "constant", n = 1.46 }
[[layers]]
name = "film"
thickness_nm = 55.0
coherent = true
[layers.material]
law = "constant"
n = { value = 2.0, min = 1.5, max = 2.5 }
k = { value = 0.05, min = 0.0, max = 1.0, vary = false }
[substrate]
material = { law = "constant", n = 3.882, k = 0.019 }
"""


def write(tmp_path, text, name="model.toml"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def test_parses_layers_parameters_and_free_flags(tmp_path):
    stack = load_model(write(tmp_path, OXIDE_FILM))
    assert stack.name == "oxide and film"
    assert [layer.name for layer in stack.layers] == ["oxide", "film"]
    params = stack.parameters()
    assert params["oxide.thickness_nm"].value == 100.0 and params["oxide.thickness_nm"].is_free
    assert (params["oxide.thickness_nm"].min, params["oxide.thickness_nm"].max) == (0.0, 500.0)
    assert not params["film.thickness_nm"].is_free
    assert params["film.material.n"].is_free
    assert not params["film.material.k"].is_free  # vary = false
    assert set(stack.free_parameters()) == {"oxide.thickness_nm", "film.material.n"}
    # the ambient defaults to air, n = 1
    assert stack.ambient.nk(np.array([500.0]))[0] == pytest.approx(1.0)


def test_plain_numbers_are_fixed_and_write_back_as_numbers(tmp_path):
    stack = load_model(write(tmp_path, OXIDE_FILM))
    text = stack.to_toml()
    assert "thickness_nm = 55.0\n" in text
    assert 'thickness_nm = { value = 100.0, min = 0.0, max = 500.0 }' in text


def test_round_trip_text_and_parameters(tmp_path):
    stack = load_model(write(tmp_path, OXIDE_FILM))
    out = save_model(stack, tmp_path / "again.toml")
    again = load_model(out)
    assert again.to_toml() == stack.to_toml()
    assert again.parameters() == stack.parameters()


def test_fitted_stack_round_trips(tmp_path):
    stack = load_model(write(tmp_path, OXIDE_FILM))
    fitted = stack.with_values({"oxide.thickness_nm": 101.234567890123, "film.material.n": 2.0123456789})
    save_model(fitted, tmp_path / "fitted.toml")
    again = load_model(tmp_path / "fitted.toml")
    assert again.parameters()["oxide.thickness_nm"].value == 101.234567890123  # repr floats: exact
    assert again.parameters()["film.material.n"].value == 2.0123456789
    assert again.parameters()["oxide.thickness_nm"].is_free


def test_expr_ties_and_extras_round_trip(tmp_path):
    text = OXIDE_FILM.replace('thickness_nm = 55.0', 'thickness_nm = { value = 50.0, expr = "oxide.thickness_nm / 2" }')
    text += textwrap.dedent("""
        [instrument]
        bandwidth_nm = 2.0
        angle_spread_deg = 0.3
        [[samples]]
        name = "w1"
        data = "w1.csv"
        overrides = { "oxide.thickness_nm" = { value = 90.0, min = 0.0, max = 500.0 } }
        [[samples]]
        name = "w2"
        """)
    stack = load_model(write(tmp_path, text))
    assert stack.parameters()["film.thickness_nm"].expr == "oxide.thickness_nm / 2"
    assert not stack.parameters()["film.thickness_nm"].is_free
    assert stack.extras["instrument"] == {"bandwidth_nm": 2.0, "angle_spread_deg": 0.3}
    assert stack.extras["samples"][0]["overrides"]["oxide.thickness_nm"]["value"] == 90.0
    save_model(stack, tmp_path / "again.toml")
    again = load_model(tmp_path / "again.toml")
    assert again.extras["samples"] == stack.extras["samples"]
    assert again.extras["instrument"] == stack.extras["instrument"]
    assert again.parameters()["film.thickness_nm"].expr == "oxide.thickness_nm / 2"


def test_thick_substrate_and_exit(tmp_path):
    text = """
    [[layers]]
    name = "coat"
    thickness_nm = 20.0
    material = { law = "constant", n = 2.0, k = 0.1 }
    [substrate]
    material = { law = "constant", n = 1.52 }
    thickness_mm = 1.0
    [exit]
    material = "air"
    """
    stack = load_model(write(tmp_path, text))
    assert stack.substrate_thickness_mm == 1.0
    assert stack.exit is not None
    inputs = stack.optical_inputs(np.array([500.0, 600.0]))
    assert inputs.coherent == [True, False]
    assert inputs.thickness_nm[-1] == pytest.approx(1e6)
    again = model_from_text(stack.to_toml())
    assert again.substrate_thickness_mm == 1.0 and again.exit is not None


def test_the_toml_writer_output_is_valid_toml_for_awkward_values():
    import tomllib

    table = {"name": 'quote " and \\ backslash, ü', "x": math.inf, "dotted.key": {"value": 1.0},
             "arr": [1, 2.5], "nested": {"deep": [{"a": 1}, {"a": 2, "b": {"c": "d"}}]}}
    parsed = tomllib.loads(dumps_toml(table))
    assert parsed["name"] == table["name"]
    assert parsed["x"] == math.inf
    assert parsed["dotted.key"] == {"value": 1.0}
    assert parsed["nested"]["deep"][1]["b"]["c"] == "d"


# -- errors: one message naming the file, the key path and what was expected ------------

BAD_MODELS = {
    "unknown top-level key": ("colour = 1\n[substrate]\nmaterial = 'air'\n", "model.toml: colour", "one of name"),
    "unknown layer key": ("[[layers]]\nname='a'\nthickness_nm=1.0\nmaterial='air'\ncolor='red'\n"
                          "[substrate]\nmaterial='air'\n", "model.toml: layers[1].color", "[[layers]]"),
    "unknown law": ("[substrate]\nmaterial = { law = 'magic' }\n", "model.toml: substrate.material.law", "constant"),
    "unknown material": ("[substrate]\nmaterial = 'unobtainium'\n", "model.toml: substrate.material", "inline law"),
    "duplicate layer": ("[[layers]]\nname='a'\nthickness_nm=1.0\nmaterial='air'\n"
                        "[[layers]]\nname='a'\nthickness_nm=2.0\nmaterial='air'\n[substrate]\nmaterial='air'\n",
                        "model.toml: layers[2].name", "unique"),
    "negative thickness": ("[[layers]]\nname='a'\nthickness_nm=-3.0\nmaterial='air'\n[substrate]\nmaterial='air'\n",
                           "model.toml: layers[1].thickness_nm", ">= 0"),
    "min above max": ("[[layers]]\nname='a'\nthickness_nm={value=5.0, min=10.0, max=1.0}\nmaterial='air'\n"
                      "[substrate]\nmaterial='air'\n", "model.toml: layers[1].thickness_nm", "min <= max"),
    "value outside bounds": ("[[layers]]\nname='a'\nthickness_nm={value=50.0, min=0.0, max=10.0}\nmaterial='air'\n"
                             "[substrate]\nmaterial='air'\n", "model.toml: layers[1].thickness_nm", "min <= value"),
    "law parameter outside bounds": ("[substrate]\nmaterial = { law = 'constant', n = { value = 1.0, min = 2.0, "
                                     "max = 3.0 } }\n", "model.toml: substrate.material.n", "min <= value"),
    "toml syntax": ("[[layers]]\nname = 'a'\nthickness_nm = = 3\n", "model.toml:3:", "TOML syntax"),
    "no substrate": ("name = 'x'\n", "model.toml: substrate", "[substrate]"),
    "bad layer name": ("[[layers]]\nname='a b'\nthickness_nm=1.0\nmaterial='air'\n[substrate]\nmaterial='air'\n",
                       "model.toml: layers[1].name", "letters, digits"),
    "missing thickness": ("[[layers]]\nname='a'\nmaterial='air'\n[substrate]\nmaterial='air'\n",
                          "model.toml: layers[1]", "thickness_nm"),
    "coherent not a bool": ("[[layers]]\nname='a'\nthickness_nm=1.0\nmaterial='air'\ncoherent='yes'\n"
                            "[substrate]\nmaterial='air'\n", "model.toml: layers[1].coherent", "true"),
    "exit without slab": ("[substrate]\nmaterial='air'\n[exit]\nmaterial='air'\n", "model.toml: exit", "thickness_mm"),
    "samples not tables": ("samples = [1, 2]\n[substrate]\nmaterial='air'\n", "model.toml: samples", "[[samples]]"),
    "instrument unknown key": ("[instrument]\nfocus = 1.0\n[substrate]\nmaterial='air'\n",
                               "model.toml: instrument.focus", "bandwidth_nm"),
    "instrument negative": ("[instrument]\nbandwidth_nm = -1.0\n[substrate]\nmaterial='air'\n",
                            "model.toml: instrument.bandwidth_nm", ">= 0"),
}


@pytest.mark.parametrize("case", sorted(BAD_MODELS))
def test_bad_model_files_name_the_place(tmp_path, case):
    text, where, expected = BAD_MODELS[case]
    path = write(tmp_path, text)
    with pytest.raises(LaminaInputError) as info:
        load_model(path)
    message = str(info.value)
    assert message.startswith(str(tmp_path / where)), message
    assert expected in message, message
    assert path.read_text(encoding="utf-8") == text  # the input is never touched


def test_syntax_error_names_line_and_column(tmp_path):
    path = write(tmp_path, "name = 'x'\n[substrate]\nmaterial = 'air\n")
    with pytest.raises(LaminaInputError) as info:
        load_model(path)
    assert str(info.value).startswith(f"{path}:3:"), str(info.value)


def test_missing_file_is_an_input_error(tmp_path):
    with pytest.raises(LaminaInputError, match="not found"):
        load_model(tmp_path / "absent.toml")


def test_save_model_is_atomic_and_leaves_no_temporary_file(tmp_path):
    stack = load_model(write(tmp_path, OXIDE_FILM))
    target = tmp_path / "out" / "m.toml"
    with pytest.raises(LaminaInputError, match="folder does not exist"):
        save_model(stack, target)
    target.parent.mkdir()
    save_model(stack, target)
    assert sorted(p.name for p in target.parent.iterdir()) == ["m.toml"]


def test_lamina_top_level_entry_points():
    assert lamina.load_model is load_model
    assert lamina.save_model is save_model


@pytest.mark.parametrize("case", sorted(BAD_MODELS))
def test_bad_model_files_exit_2_through_the_command_line(tmp_path, capsys, case):
    from lamina.cli.main import main

    text, where, expected = BAD_MODELS[case]
    path = write(tmp_path, text)
    out = tmp_path / "out.csv"
    code = main(["simulate", str(path), "--wavelengths", "400:800:100", "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2
    assert err.startswith(f"lamina: error: {tmp_path / where}"), err
    assert not out.exists() and sorted(p.name for p in tmp_path.iterdir()) == ["model.toml"]
    assert path.read_text(encoding="utf-8") == text


def test_library_materials_write_back_as_their_names(tmp_path):
    text = "[[layers]]\nname = 'oxide'\nthickness_nm = 100.0\nmaterial = 'SiO2'\n[substrate]\nmaterial = 'Si'\n"
    stack = load_model(write(tmp_path, text))
    if stack.substrate.name != "Si":
        pytest.skip("material library not available")
    out = stack.to_toml()
    assert 'material = "SiO2"' in out and 'material = "Si"' in out
    assert load_model(save_model(stack, tmp_path / "again.toml")).to_toml() == out


def test_toml_writer_round_trips_arbitrary_strings_and_floats():
    import tomllib

    from hypothesis import given, settings
    from hypothesis import strategies as st

    keys = st.text(min_size=1, max_size=12)
    scalars = st.one_of(st.text(max_size=30), st.floats(allow_nan=False), st.integers(-10**9, 10**9), st.booleans())
    tables = st.dictionaries(keys, st.one_of(scalars, st.dictionaries(keys, scalars, max_size=4),
                                             st.lists(st.dictionaries(keys, scalars, min_size=1, max_size=3),
                                                      min_size=1, max_size=3)), max_size=6)

    @settings(max_examples=100, deadline=None)
    @given(tables)
    def check(table):
        assert tomllib.loads(dumps_toml(table)) == table

    check()
