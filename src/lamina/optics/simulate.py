"""`lamina.simulate(stack, wavelength_nm=, angle_deg=)` -> xarray.Dataset.

Evaluates the stack's materials at the requested wavelengths, runs the solver
(with instrument averaging when asked) and returns a Dataset with dims
(angle, wavelength) -- and a leading ``batch`` dim when ``values`` holds arrays
of parameter values -- with units in ``attrs``.
"""
from __future__ import annotations

from typing import Mapping

import numpy as np

from ..errors import LaminaInputError
from .averaging import Instrument, averaged_solve

#: data variable -> (units, long name)
VARIABLES = {
    "psi": ("deg", "ellipsometric angle Psi"),
    "delta": ("deg", "ellipsometric angle Delta, in [0, 360)"),
    "R": ("1", "reflectance, unpolarized"),
    "T": ("1", "transmittance, unpolarized"),
    "Rs": ("1", "reflectance, s-polarized"),
    "Rp": ("1", "reflectance, p-polarized"),
    "Ts": ("1", "transmittance, s-polarized"),
    "Tp": ("1", "transmittance, p-polarized"),
    "A": ("1", "absorptance 1 - R - T, unpolarized"),
    "N": ("1", "normalized Mueller element N = cos 2Psi"),
    "C": ("1", "normalized Mueller element C = sin 2Psi cos Delta"),
    "S": ("1", "normalized Mueller element S = sin 2Psi sin Delta"),
    "P": ("1", "degree of polarization sqrt(N^2 + C^2 + S^2)"),
    "eps_pseudo_1": ("1", "pseudo-dielectric function, real part"),
    "eps_pseudo_2": ("1", "pseudo-dielectric function, imaginary part"),
}


def simulate(stack, wavelength_nm, angle_deg, instrument: Instrument | None = None,
             values: Mapping[str, object] | None = None):
    """Optical response of `stack` as an xarray.Dataset (see module docstring).

    wavelength_nm, angle_deg: numbers or 1-D arrays (nm, degrees of incidence
    in the ambient).  instrument: optional `Instrument` averaging.  values:
    full parameter names -> floats or (B,) arrays, passed to
    ``stack.optical_inputs``; arrays add the leading ``batch`` dim.
    """
    import xarray as xr

    wavelength = _axis(wavelength_nm, "wavelength_nm")
    angle = _axis(angle_deg, "angle_deg")
    if instrument is not None and not isinstance(instrument, Instrument):
        raise LaminaInputError(f"instrument is a {type(instrument).__name__}", "simulate(instrument=...)",
                               "a lamina.Instrument or None")
    nominal = stack.optical_inputs(wavelength, values)

    def n_media_at(wl):
        if wl.shape == wavelength.shape and np.array_equal(wl, wavelength):
            return nominal.n_media
        return stack.optical_inputs(wl, values).n_media

    out = averaged_solve(n_media_at, nominal.thickness_nm, nominal.coherent, wavelength, angle, instrument)
    shape = out["psi"].shape
    if len(shape) > 3:
        raise LaminaInputError(f"parameter values give batch shape {shape[:-2]}", "simulate(values=...)",
                               "floats or 1-D arrays of one common length")
    dims = ("batch", "angle", "wavelength") if len(shape) == 3 else ("angle", "wavelength")
    coords = {"angle": ("angle", angle, {"units": "deg", "long_name": "angle of incidence"}),
              "wavelength": ("wavelength", wavelength, {"units": "nm", "long_name": "vacuum wavelength"})}
    if len(shape) == 3:
        coords["batch"] = ("batch", np.arange(shape[0]))
        for name, val in (values or {}).items():
            arr = np.asarray(val, dtype=float)
            if arr.ndim == 1:
                coords[name] = ("batch", arr)
    data = dict(out)
    data["eps_pseudo_1"] = out["eps_pseudo"].real
    data["eps_pseudo_2"] = out["eps_pseudo"].imag
    data_vars = {name: (dims, np.asarray(data[name], dtype=float), {"units": units, "long_name": long_name})
                 for name, (units, long_name) in VARIABLES.items()}
    attrs = {"model": stack.describe(),
             "conventions": "N = n + ik; rho = tan(Psi) exp(i Delta), Delta in [0, 360); "
                            "bare absorbing substrate: 0 < Delta < 180 (see docs/optics.md)"}
    attrs.update((instrument or Instrument()).to_attrs())
    return xr.Dataset(data_vars, coords=coords, attrs=attrs)


def _axis(values, name):
    arr = np.asarray(values, dtype=float)
    if arr.ndim == 0:
        arr = arr.reshape(1)
    if arr.ndim != 1 or arr.size == 0:
        raise LaminaInputError(f"{name} has shape {arr.shape}", f"simulate({name}=...)",
                               "a number or a non-empty 1-D array")
    return arr
