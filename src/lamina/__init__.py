"""lamina: thin-film optical metrology.

Public entry points (stable contract):

- ``lamina.simulate(stack, wavelength_nm=..., angle_deg=...)`` -> xarray.Dataset
- ``lamina.load_model(path)`` -> Stack; ``lamina.save_model(stack, path)``
- ``lamina.read_data(path)`` -> xarray.Dataset (dims angle, wavelength)
- ``lamina.fit(stack, data, global_search=False)`` -> FitResult
- ``lamina.read_map(path)`` -> xarray.Dataset (dims site, angle, wavelength)
- ``lamina.materials.get(name)`` -> a material (``.nk(wavelength_nm)``, ``.epsilon(...)``)

Heavy modules load on first use so that the command line starts quickly.
"""
from __future__ import annotations

import importlib

__version__ = "0.1.0"

_LAZY = {
    "simulate": ("lamina.optics.simulate", "simulate"),
    "Instrument": ("lamina.optics.averaging", "Instrument"),
    "load_model": ("lamina.stack.modelfile", "load_model"),
    "save_model": ("lamina.stack.modelfile", "save_model"),
    "read_data": ("lamina.data.readers", "read_data"),
    "read_map": ("lamina.qa.maps", "read_map"),
    "Stack": ("lamina.stack.layers", "Stack"),
    "Layer": ("lamina.stack.layers", "Layer"),
    "Param": ("lamina.parameters", "Param"),
    "LaminaInputError": ("lamina.errors", "LaminaInputError"),
}


def __getattr__(name):
    if name in _LAZY:
        module_name, attr = _LAZY[name]
        value = getattr(importlib.import_module(module_name), attr)
        globals()[name] = value
        return value
    if name in ("materials", "dispersion", "optics", "data", "fit", "qa", "report", "stack"):
        # lamina.fit is a package that is also callable: lamina.fit(stack, data)
        return importlib.import_module(f"lamina.{name}")
    raise AttributeError(f"module 'lamina' has no attribute '{name}'")


__all__ = sorted(_LAZY) + ["__version__"]
