"""The shared plot style is a valid set of matplotlib rcParams and scopes cleanly."""
import matplotlib

from lamina.report.style import COLOURS, apply, plot_style


def test_plot_style_is_scoped_to_the_block():
    before = matplotlib.rcParams["axes.grid"], matplotlib.rcParams["savefig.bbox"]
    with plot_style():
        assert matplotlib.rcParams["axes.grid"] is True
        assert matplotlib.rcParams["axes.prop_cycle"].by_key()["color"][:2] == COLOURS[:2]
    assert (matplotlib.rcParams["axes.grid"], matplotlib.rcParams["savefig.bbox"]) == before


def test_apply_sets_the_params_globally():
    with matplotlib.rc_context():  # restore afterwards; rc_context undoes apply() too
        apply()
        assert matplotlib.rcParams["savefig.bbox"] == "tight"
        assert matplotlib.rcParams["axes.prop_cycle"].by_key()["color"] == COLOURS
