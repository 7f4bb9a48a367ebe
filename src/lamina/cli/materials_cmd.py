"""`lamina materials`: list the material library, or show n, k of one material."""
from __future__ import annotations

import argparse
import math

HELP = "list the material library, or show n, k of one material"
DESCRIPTION = (
    "Without a name: every library material with its law, valid wavelength range and source. "
    "With a name (case-insensitive; aliases such as 'fused silica' or 'glass' work): n and k at a few "
    "wavelengths. Library values describe the reference samples of their publications; films from "
    "another process differ, and results computed with them are model-dependent: fit your own films, "
    "verify against traceable reference samples, and let local procedures and qualified staff decide "
    "what a result means for a wafer or a part."
)
EXAMPLE = ("  lamina materials\n"
           "  lamina materials SiO2\n"
           "  lamina materials Si --wavelengths 400,500,633\n\n"
           "exit codes: 0 ok, 2 unknown material or bad wavelengths")

#: wavelengths shown when none are asked for (those inside the material's range)
DEFAULT_WAVELENGTHS_NM = (300.0, 400.0, 500.0, 632.8, 800.0, 1000.0, 1550.0)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("name", nargs="?", metavar="NAME", help="a library material (omit to list them all)")
    parser.add_argument("--wavelengths", metavar="NM[,NM...]",
                        help="comma-separated wavelengths in nm (default: a few inside the valid range)")
    parser.add_argument("--sources", action="store_true", help="with the list: print each full source")


def parse_wavelengths(text: str):
    """'400,500,633' -> [400.0, 500.0, 633.0]; LaminaInputError naming --wavelengths otherwise."""
    from ..errors import LaminaInputError
    values = []
    for part in text.split(","):
        part = part.strip()
        try:
            value = float(part)
        except ValueError:
            raise LaminaInputError(f"'{part}' is not a number", "--wavelengths",
                                   "comma-separated wavelengths in nm, e.g. 400,500,633") from None
        if not math.isfinite(value) or value <= 0:
            raise LaminaInputError(f"{part} is not a positive wavelength", "--wavelengths",
                                   "wavelengths in nm greater than 0")
        values.append(value)
    return values


def _range_text(valid_range_nm) -> str:
    if valid_range_nm is None:
        return "any"
    lo, hi = valid_range_nm
    return f"{lo:g}-{hi:g} nm"


def _list(show_sources: bool) -> int:
    from .. import materials
    from ..errors import LaminaInputError
    rows = []
    for name in materials.names():
        entry = materials.entry(name)
        try:
            material = materials.get(name)
            rows.append((name, entry.law, _range_text(material.valid_range_nm), material.source))
        except LaminaInputError as exc:   # an entry whose law is missing from this installation
            rows.append((name, entry.law, "-", f"unavailable: {exc.problem}"))
    print(f"{'name':<8} {'law':<13} {'valid range':<20} source")
    for name, law, valid, source in rows:
        shown = source if show_sources or len(source) <= 70 else source[:67] + "..."
        print(f"{name:<8} {law:<13} {valid:<20} {shown}")
    print("\nNames ignore case; aliases work (e.g. 'fused silica', 'glass'). "
          "'lamina materials NAME' shows n, k; --sources prints sources in full.")
    return 0


def _show(name: str, wavelengths_text: str | None) -> int:
    import numpy as np

    from .. import materials
    material = materials.get(name)
    if wavelengths_text is not None:
        wavelengths = np.array(parse_wavelengths(wavelengths_text))
        material.check_range(wavelengths, "--wavelengths")
    else:
        wavelengths = np.array(DEFAULT_WAVELENGTHS_NM)
        if material.valid_range_nm is not None:
            lo, hi = material.valid_range_nm
            wavelengths = wavelengths[(wavelengths >= lo) & (wavelengths <= hi)]
    nk = material.nk(wavelengths)
    print(f"{material.name}  ({material.law}, valid {_range_text(material.valid_range_nm)})")
    print(f"source: {material.source}")
    print(f"{'wavelength_nm':>14} {'n':>10} {'k':>12}")
    for wl, value in zip(wavelengths, nk):
        print(f"{wl:>14g} {value.real:>10.5f} {value.imag:>12.5g}")
    return 0


def run(args: argparse.Namespace) -> int:
    if args.name is None:
        if args.wavelengths is not None:
            from ..errors import LaminaInputError
            raise LaminaInputError("--wavelengths needs a material name", "--wavelengths",
                                   "lamina materials NAME --wavelengths 400,500,633")
        return _list(args.sources)
    return _show(args.name, args.wavelengths)
