"""Target and tolerance files, band margins, the Wilson interval (lamina.qa.recipes)."""
import numpy as np
import pytest
from scipy.stats import binomtest

from lamina.errors import LaminaInputError
from lamina.qa.recipes import Band, load_target, load_tolerances, wilson_interval

GOOD_TARGET = """
min_yield = 0.9

[[bands]]
name = "visible anti-reflection"
quantity = "R"
angle_deg = 0.0
polarization = "unpolarized"
wavelength_nm = [450.0, 650.0]
max = 0.005

[[bands]]
name = "transmission window"
quantity = "T"
wavelength_nm = [500.0, 600.5]
step_nm = 2.0
target = 0.95
tolerance = 0.03

[color]
L = 30.0
a = 0.0
b = -5.0
max_delta_e = 3.0
observer = 10
"""


def _write(tmp_path, text, name="target.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_target_file_is_read(tmp_path):
    target = load_target(_write(tmp_path, GOOD_TARGET))
    assert target.min_yield == 0.9
    ar, window = target.bands
    assert (ar.quantity, ar.max, ar.min, ar.wavelength_nm) == ("R", 0.005, None, (450.0, 650.0))
    assert window.min == pytest.approx(0.92) and window.max == pytest.approx(0.98)
    assert target.color.lab == (30.0, 0.0, -5.0) and target.color.observer == 10
    assert target.color.mode == "reflected" and target.tolerances is None


def test_band_grid_is_inclusive():
    band = Band("b", "R", (500.0, 600.5), step_nm=2.0, max=1.0)
    grid = band.grid_nm()
    assert grid[0] == 500.0 and grid[-1] == 600.5 and np.allclose(np.diff(grid[:-1]), 2.0)
    assert Band("c", "R", (450.0, 650.0), max=1.0).grid_nm().size == 201  # 1 nm default, both ends


def test_margins_positive_inside():
    band = Band("b", "T", (400.0, 500.0), min=0.9, max=0.98)
    assert band.margin([0.95, 0.99, 0.85]) == pytest.approx([0.03, -0.01, -0.05])
    assert Band("m", "R", (400.0, 500.0), max=0.01).allowed_width() == pytest.approx(0.01)
    assert Band("m", "psi", (400.0, 500.0), min=30.0).allowed_width() == pytest.approx(60.0)


@pytest.mark.parametrize("text, where, words", [
    (GOOD_TARGET.replace("max = 0.005", "max = 0.005\ncolour = 1"), "bands.1.colour", "unknown key"),
    (GOOD_TARGET.replace('quantity = "R"', 'quantity = "X"'), "bands.1.quantity", "not allowed"),
    (GOOD_TARGET.replace("max = 0.005", "min = 0.01\nmax = 0.005"), "bands.1.min", "greater than"),
    (GOOD_TARGET.replace("wavelength_nm = [450.0, 650.0]", "wavelength_nm = [650.0, 450.0]"),
     "bands.1.wavelength_nm", "increasing"),
    (GOOD_TARGET.replace("max = 0.005", ""), "bands.1", "no limit"),
    (GOOD_TARGET.replace("tolerance = 0.03", ""), "bands.2", "missing key 'tolerance'"),
    (GOOD_TARGET.replace("max_delta_e = 3.0", ""), "color", "missing key 'max_delta_e'"),
    (GOOD_TARGET.replace("observer = 10", "observer = 5"), "color.observer", "not allowed"),
    (GOOD_TARGET.replace("min_yield = 0.9", "min_yield = 90"), "min_yield", "too large"),
    (GOOD_TARGET.replace("min_yield = 0.9", "minimum_yield = 0.9"), "minimum_yield", "unknown key"),
    (GOOD_TARGET.replace('polarization = "unpolarized"', 'polarization = "s"').replace('quantity = "R"',
                                                                                      'quantity = "psi"'),
     "bands.1.polarization", "makes no sense"),
    (GOOD_TARGET.replace('name = "transmission window"', 'name = "visible anti-reflection"'), "bands",
     "duplicate"),
    ("min_yield = 0.5\n", "target.toml", "no [[bands]]"),
    ("[[bands]\n", "target.toml", "not valid TOML"),
])
def test_bad_target_names_file_and_key(tmp_path, text, where, words):
    path = _write(tmp_path, text)
    with pytest.raises(LaminaInputError) as info:
        load_target(path)
    message = str(info.value)
    assert str(path) in message and where in message and words in message


def test_missing_target_file(tmp_path):
    with pytest.raises(LaminaInputError, match="file not found"):
        load_target(tmp_path / "nope.toml")


TOLERANCES = """
[tolerances.default]
thickness_pct = 1.0
index_pct = 0.5
distribution = "gaussian"

[tolerances.layers.H1]
thickness_nm = 2.0
distribution = "uniform"

[tolerances.run]
thickness_pct = 0.5
"""


def test_tolerance_file(tmp_path):
    tol = load_tolerances(_write(tmp_path, TOLERANCES, "tol.toml"))
    assert tol.default.thickness_pct == 1.0 and tol.default.index_pct == 0.5
    h1 = tol.for_layer("H1")
    # a layer table replaces the thickness error, inherits what it does not set
    assert (h1.thickness_nm, h1.thickness_pct, h1.index_pct, h1.distribution) == (2.0, 0.0, 0.5, "uniform")
    assert tol.for_layer("L1") == tol.default
    assert tol.default.thickness_scale_nm(80.0) == pytest.approx(0.8)
    assert tol.run_thickness_pct == 0.5 and not tol.is_zero()
    with pytest.raises(LaminaInputError, match="tolerances.layers.H1"):
        tol.check_layers(["L1", "L2"])


def test_tolerances_inside_target(tmp_path):
    target = load_target(_write(tmp_path, GOOD_TARGET + TOLERANCES))
    assert target.tolerances.for_layer("H1").thickness_nm == 2.0


@pytest.mark.parametrize("edit, where", [
    (("thickness_nm = 2.0", "thickness_nm = 2.0\nthickness_pct = 1.0"), "tolerances.layers.H1"),
    (('distribution = "uniform"', 'distribution = "flat"'), "tolerances.layers.H1.distribution"),
    (("thickness_pct = 1.0", "thickness_pct = -1.0"), "tolerances.default.thickness_pct"),
    (("[tolerances.run]", "[tolerances.runs]"), "tolerances.runs"),
    (("[tolerances.run]\nthickness_pct = 0.5", "[tolerances.run]\nthickness_nm = 0.5"), "tolerances.run"),
])
def test_bad_tolerances(tmp_path, edit, where):
    path = _write(tmp_path, TOLERANCES.replace(*edit), "tol.toml")
    with pytest.raises(LaminaInputError) as info:
        load_tolerances(path)
    assert str(path) in str(info.value) and where in str(info.value)


@pytest.mark.parametrize("successes, trials", [(81, 263), (0, 20), (20, 20), (1, 10), (9990, 10000)])
def test_wilson_interval_matches_scipy(successes, trials):
    # Wilson (1927), JASA 22, 209; reference implementation: scipy.stats.binomtest(...).proportion_ci("wilson").
    # Newcombe (1998), Stat. Med. 17, 857, worked example 81/263: 0.2553-0.3662 (from memory).
    ref = binomtest(successes, trials).proportion_ci(confidence_level=0.95, method="wilson")
    assert wilson_interval(successes, trials) == pytest.approx((ref.low, ref.high), abs=1e-12)
    if (successes, trials) == (81, 263):
        assert wilson_interval(81, 263) == pytest.approx((0.2553, 0.3662), abs=5e-5)


from hypothesis import given, strategies as st  # noqa: E402

finite = st.floats(min_value=-1e3, max_value=1e3, allow_nan=False)


@given(low=st.one_of(st.none(), finite), width=st.floats(min_value=0, max_value=1e3), value=finite,
       has_max=st.booleans())
def test_margin_sign_means_inside(low, width, value, has_max):
    # common practice: a value is in spec when min <= value <= max; the margin is its distance to the
    # nearest limit, positive inside
    high = (low if low is not None else 0.0) + width if has_max else None
    if low is None and high is None:
        return
    band = Band("p", "R", (400.0, 500.0), min=low, max=high)
    margin = float(band.margin([value])[0])
    inside = (low is None or value >= low) and (high is None or value <= high)
    assert (margin >= 0) == inside
    limits = [x for x in (low, high) if x is not None]
    if inside:  # distance to the nearer limit
        assert margin == pytest.approx(min(abs(value - x) for x in limits), abs=1e-9)
    else:  # minus the distance to the violated limit (only one can be violated when min <= max)
        violated = low if (low is not None and value < low) else high
        assert margin == pytest.approx(-abs(value - violated), abs=1e-9)
