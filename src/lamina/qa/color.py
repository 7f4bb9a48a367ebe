"""Colour of reflected or transmitted light: CIE XYZ, xy, CIELAB and Delta E 2000.

Method (CIE 15:2004, sections 7.1 and 8.2):

    X = k * sum_lambda S(lambda) R(lambda) xbar(lambda) dlambda   (Y, Z alike)
    k = 100 / sum_lambda S(lambda) ybar(lambda) dlambda

with S the relative spectral power of illuminant D65 and xbar, ybar, zbar the
CIE 1931 2 degree or CIE 1964 10 degree colour-matching functions, summed on a
1 nm grid from 380 to 780 nm.  The tables are the published CIE tables as
shipped by the `colour-science` package (`colour.SDS_ILLUMINANTS["D65"]`,
`colour.MSDS_CMFS`); the 5 nm D65 table is interpolated to 1 nm with
colour-science's own interpolator.  The reference white for CIELAB is the
perfect reflector under the same illuminant and observer (Y_n = 100), so a
perfect reflector has L* = 100, a* = b* = 0.

Everything is vectorized over leading batch axes: a spectrum of shape
(..., W) on `COLOR_GRID_NM` gives XYZ of shape (..., 3).
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np

from ..errors import LaminaInputError

#: wavelength grid (nm) of the colour sums: 380-780 nm, 1 nm step (CIE 15:2004
#: allows 380-780 nm as the practical range of the visible).
COLOR_GRID_NM = np.arange(380.0, 781.0, 1.0)

OBSERVERS = {
    2: "CIE 1931 2 Degree Standard Observer",
    10: "CIE 1964 10 Degree Standard Observer",
}


@lru_cache(maxsize=4)
def _tables(observer: int) -> tuple[np.ndarray, np.ndarray]:
    """(weights (W, 3), white XYZ (3,)) for D65 and `observer` on COLOR_GRID_NM."""
    import colour  # heavy import, only when colour is asked for

    if observer not in OBSERVERS:
        raise LaminaInputError(f"observer = {observer!r} is not known", "color.observer", "2 or 10")
    shape = colour.SpectralShape(COLOR_GRID_NM[0], COLOR_GRID_NM[-1], 1.0)
    cmfs = colour.MSDS_CMFS[OBSERVERS[observer]].copy().align(shape).values  # (W, 3)
    illuminant = colour.SDS_ILLUMINANTS["D65"].copy().align(shape).values  # (W,)
    weights = illuminant[:, None] * cmfs
    # normalise so that the perfect reflector has Y = 100 (CIE 15:2004 eq. 7.2)
    weights = weights * (100.0 / weights[:, 1].sum())
    white_xyz = weights.sum(axis=0)
    return weights, white_xyz


def spectrum_to_xyz(spectrum, observer: int = 2) -> np.ndarray:
    """CIE XYZ (Y of the perfect reflector = 100) of a reflectance or transmittance.

    `spectrum` has shape (..., W) on `COLOR_GRID_NM` (fractions 0..1).
    """
    weights, _ = _tables(observer)
    spectrum = np.asarray(spectrum, dtype=float)
    if spectrum.shape[-1] != weights.shape[0]:
        raise ValueError(f"spectrum must have {weights.shape[0]} points on COLOR_GRID_NM")
    return spectrum @ weights


def white_point(observer: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """(XYZ, xy) of the perfect reflector under D65 for `observer`."""
    _, white = _tables(observer)
    return white, white[:2] / white.sum()


def xyz_to_xy(xyz) -> np.ndarray:
    """Chromaticity x, y = X/(X+Y+Z), Y/(X+Y+Z); black maps to the white point's xy."""
    xyz = np.asarray(xyz, dtype=float)
    total = xyz.sum(axis=-1, keepdims=True)
    safe = np.where(total > 0, total, 1.0)
    return np.where(total > 0, xyz[..., :2] / safe, np.nan)


def xyz_to_lab(xyz, observer: int = 2) -> np.ndarray:
    """CIELAB (CIE 15:2004 eq. 8.1-8.3) with the perfect reflector under D65 as white."""
    import colour

    white_xyz, white_xy = white_point(observer)
    # colour.XYZ_to_Lab works on the 0..1 scale with the white given by its xy
    # (Y_n = 1); dividing by 100 keeps our Y_n = 100 convention.
    return colour.XYZ_to_Lab(np.asarray(xyz, dtype=float) / 100.0, white_xy)


def delta_e_2000(lab, lab_reference) -> np.ndarray:
    """CIEDE2000 colour difference (Sharma, Wu and Dalal 2005), vectorized."""
    import colour

    return np.asarray(colour.delta_E(np.asarray(lab, dtype=float), np.asarray(lab_reference, dtype=float),
                                     method="CIE 2000"))


def color_summary(spectrum, observer: int = 2) -> dict:
    """XYZ, xy and Lab of one spectrum on COLOR_GRID_NM, as plain floats for JSON."""
    xyz = spectrum_to_xyz(spectrum, observer)
    lab = xyz_to_lab(xyz, observer)
    xy = xyz_to_xy(xyz)
    return {"XYZ": [float(v) for v in xyz], "xy": [float(v) for v in xy],
            "Lab": [float(v) for v in lab]}
