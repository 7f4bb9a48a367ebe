"""A shared look for lamina's plots: a few matplotlib rcParams, nothing more.

Plot modules may wrap their figure code in ``with plot_style():`` (or call
`apply()` once) so that every PNG in a report reads alike: white background,
light grid, axis labels that carry units, sizes fit for an A4/letter-wide report
column.  Using it is optional; nothing in lamina requires it.
"""
from __future__ import annotations

import contextlib

#: the rcParams lamina's plots share (sizes in points; the report shows PNGs at 100 dpi)
RC: dict = {
    "figure.figsize": (7.0, 4.4),
    "figure.dpi": 100,
    "savefig.dpi": 110,
    "savefig.bbox": "tight",
    "figure.facecolor": "white",
    "axes.facecolor": "white",
    "axes.edgecolor": "#3a4450",
    "axes.linewidth": 0.8,
    "axes.grid": True,
    "grid.color": "#d7dde5",
    "grid.linewidth": 0.6,
    "axes.titlesize": 11,
    "axes.labelsize": 10,
    "xtick.labelsize": 9,
    "ytick.labelsize": 9,
    "legend.fontsize": 8.5,
    "legend.frameon": False,
    "lines.linewidth": 1.4,
    "lines.markersize": 4.0,
    "font.family": "DejaVu Sans",
    # a colour cycle of our own choosing: distinguishable, calm, readable in print
    "axes.prop_cycle": None,
}
#: line colours, in order (angles, wafers, layers)
COLOURS = ["#2b5d8a", "#c2571a", "#3c8d4f", "#8e3b8a", "#b39a1e", "#4d4d4d", "#1f9aa6", "#a33a3a"]


def _rc() -> dict:
    from cycler import cycler
    rc = dict(RC)
    rc["axes.prop_cycle"] = cycler(color=COLOURS)
    return rc


def apply() -> None:
    """Set lamina's rcParams globally (for scripts and notebooks)."""
    import matplotlib
    matplotlib.rcParams.update(_rc())


@contextlib.contextmanager
def plot_style():
    """Use lamina's rcParams inside the block only."""
    import matplotlib
    with matplotlib.rc_context(_rc()):
        yield
