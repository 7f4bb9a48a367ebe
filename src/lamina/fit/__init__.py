"""Fitting: parameters, objectives, global search, uncertainty.

The package is itself callable, so that ``lamina.fit(stack, data)`` works
while ``lamina.fit.engine`` and friends stay importable (importing a
submodule would otherwise shadow a function of the same name).
"""
from __future__ import annotations

import sys
import types


def fit(stack, data, global_search: bool = False, **options):
    """Fit the free parameters of `stack` to `data`; see `lamina.fit.engine.fit`."""
    from .engine import fit as _fit
    return _fit(stack, data, global_search=global_search, **options)


class _CallableModule(types.ModuleType):
    def __call__(self, *args, **kwargs):
        return fit(*args, **kwargs)


sys.modules[__name__].__class__ = _CallableModule
