"""Monte Carlo yield (lamina.qa.yield_mc)."""
import numpy as np
import pytest

from lamina.dispersion.constant import Constant
from lamina.qa.recipes import Band, ErrorSpec, RecipeEvaluator, Target, Tolerances, band_requests
from lamina.qa.yield_mc import draw_errors, run_yield
from lamina.stack import Layer, Stack

#: 4-layer AR of our own design (constant indices), air side first
AR4 = [("L2", 1.46, 89.7), ("H2", 2.35, 117.4), ("L1", 1.46, 35.8), ("H1", 2.35, 12.2)]


def _setup(max_r=0.005, step_nm=10.0):
    stack = Stack([Layer(n, Constant(i), t) for n, i, t in AR4], Constant(1.52))
    target = Target(bands=(Band("vis", "R", (430.0, 670.0), max=max_r, step_nm=step_nm),), min_yield=0.9)
    return RecipeEvaluator(stack, band_requests(target)), target


def _tol(pct, index_pct=0.0, run_pct=0.0, distribution="gaussian"):
    return Tolerances(default=ErrorSpec(thickness_pct=pct, index_pct=index_pct, distribution=distribution),
                      run_thickness_pct=run_pct)


@pytest.mark.parametrize("max_r, expected", [(0.005, 1.0), (0.0015, 0.0)])
def test_zero_tolerances_give_exactly_one_or_zero(max_r, expected):
    # common practice: with no errors every trial is the design itself
    evaluator, target = _setup(max_r)
    result = run_yield(evaluator, target, _tol(0.0), trials=300, seed=1)
    assert result["pass_fraction"] == expected
    assert result["worst_layer"] is None


def test_yield_falls_as_tolerances_grow():
    evaluator, target = _setup()
    fractions = [run_yield(evaluator, target, _tol(pct, run_pct=pct / 2), trials=600, seed=7)["pass_fraction"]
                 for pct in (0.5, 1.0, 2.0, 4.0, 8.0)]
    assert all(a >= b for a, b in zip(fractions, fractions[1:])), fractions
    assert fractions[0] > 0.9 and fractions[-1] < 0.3


def test_wilson_interval_covers_the_true_fraction():
    # Binomial property of the 95 % Wilson interval (Wilson 1927; Newcombe 1998): over repeated runs the
    # interval covers the true pass fraction about 95 % of the time.  The "true" fraction is a
    # 40 000-trial estimate (its own standard error ~0.002).
    evaluator, target = _setup(step_nm=40.0)
    tol = _tol(4.0)  # a yield near one half, where the interval is widest
    truth = run_yield(evaluator, target, tol, trials=40_000, seed=12345, attribution_trials=0)["pass_fraction"]
    assert 0.2 < truth < 0.8
    covered = 0
    runs = 120
    for seed in range(runs):
        low, high = run_yield(evaluator, target, tol, trials=150, seed=seed, attribution_trials=0)["ci95"]
        covered += low <= truth <= high
    # 95 % of 120 = 114, binomial sd ~2.4: accept anything above 105 (about 3.7 sd below)
    assert covered >= 105, covered


def test_same_seed_same_result_whatever_the_chunk():
    evaluator, target = _setup()
    a = run_yield(evaluator, target, _tol(2.0, 0.5, 0.5), trials=500, seed=3, chunk=500)
    b = run_yield(evaluator, target, _tol(2.0, 0.5, 0.5), trials=500, seed=3, chunk=64)
    assert a["passed"] == b["passed"] and a["attribution"] == b["attribution"]


def test_worst_layer_is_the_loose_one():
    evaluator, target = _setup()
    tol = Tolerances(default=ErrorSpec(thickness_pct=0.2), layers={"H2": ErrorSpec(thickness_pct=4.0)})
    result = run_yield(evaluator, target, tol, trials=1000, seed=5)
    assert result["pass_fraction"] < 0.95
    assert result["worst_layer"] == "H2"
    rescued = result["attribution"]["rescued"]
    assert rescued["H2"] == max(rescued.values())
    assert result["pass"] == (result["pass_fraction"] >= 0.9)
    assert result["ci95"][0] <= result["pass_fraction"] <= result["ci95"][1]


def test_uniform_errors_stay_inside_half_width():
    nominal = np.array([100.0, 50.0])
    tol = Tolerances(default=ErrorSpec(thickness_nm=2.0, index_pct=1.0, distribution="uniform"),
                     run_thickness_pct=1.0, run_distribution="uniform")
    draws = draw_errors(tol, ["a", "b"], nominal, 20_000, seed=0)
    assert np.abs(draws.layer_error_nm).max() <= 2.0
    assert np.abs(draws.index_scale - 1).max() <= 0.01
    assert np.abs(draws.run_scale).max() <= 0.01
    # a uniform distribution on (-h, h) has standard deviation h / sqrt(3) (common practice)
    assert draws.layer_error_nm.std() == pytest.approx(2.0 / np.sqrt(3), rel=0.02)
    gauss = draw_errors(Tolerances(default=ErrorSpec(thickness_pct=1.0)), ["a", "b"], nominal, 20_000, seed=0)
    assert gauss.layer_error_nm.std(axis=0) == pytest.approx([1.0, 0.5], rel=0.03)
