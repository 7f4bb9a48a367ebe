"""`lamina inspect`: summarise and validate model files and measurement files."""
from __future__ import annotations

import math
from pathlib import Path

from ..errors import LaminaInputError

HELP = "summarise and validate a model or measurement file"
DESCRIPTION = (
    "Read a model file (.toml) or a measurement file (.csv, .nc) with the same checks as\n"
    "'lamina fit', and print a summary: layers, materials, thicknesses and free parameters of\n"
    "a model; quantities, wavelength range, angles, point count and metadata of a measurement\n"
    "(or sites and positions of a wafer-map file, which has a 'site' column).\n"
    "A file with a problem gives one message naming the file, line/key and what was expected,\n"
    "and exit code 2."
)
EXAMPLE = ("  lamina inspect oxide_on_si.toml\n  lamina inspect oxide_on_si_ellips.csv rt_normal.csv\n"
           "  lamina inspect --quiet model.toml data.csv && echo valid   # validation in a script\n")


def add_arguments(parser) -> None:
    parser.add_argument("files", nargs="+", metavar="FILE", help="model file (.toml) or measurement file (.csv, .nc)")
    parser.add_argument("--quiet", action="store_true",
                        help="print nothing; only validate (exit code 0 good, 2 bad file)")


def run(args) -> int:
    for index, name in enumerate(args.files):
        if index and not args.quiet:
            print()
        path = Path(name)
        lines = inspect_model(path) if path.suffix.lower() == ".toml" else inspect_data(path)
        if not args.quiet:
            print("\n".join(lines))
    return 0


def _fmt(value: float) -> str:
    return "-" if math.isinf(value) else f"{value:g}"


def inspect_model(path: Path) -> list[str]:
    """Summary lines of a model file (raises LaminaInputError on a bad file)."""
    from ..stack.modelfile import load_model

    stack = load_model(path)
    lines = [f"model file {path}" + (f": {stack.name}" if stack.name else ""), ""]
    lines += ["  " + line for line in stack.describe().splitlines()]
    lines += ["", "materials:"]
    for owner, material in stack._materials():
        label = material.name or f"inline law '{material.law}'"
        detail = []
        if material.valid_range_nm is not None:
            detail.append(f"valid {material.valid_range_nm[0]:g}-{material.valid_range_nm[1]:g} nm")
        if material.source:
            source = material.source
            detail.append(source if len(source) <= 90 else source[:87].rstrip() + "...")
        lines.append(f"  {owner:<10s} {label}" + (f"  ({'; '.join(detail)})" if detail else ""))
    params = stack.parameters()
    free = {k: p for k, p in params.items() if p.is_free}
    tied = {k: p for k, p in params.items() if p.expr is not None}
    lines += ["", f"parameters: {len(params)} in all, {len(free)} free, {len(tied)} tied"]
    if free:
        width = max(len(k) for k in free)
        lines.append(f"  {'free parameter':<{width}s}  {'value':>10s}  {'min':>10s}  {'max':>10s}  unit")
        for name, p in free.items():
            lines.append(f"  {name:<{width}s}  {p.value:10.5g}  {_fmt(p.min):>10s}  {_fmt(p.max):>10s}  {p.unit}")
    for name, p in tied.items():
        lines.append(f"  {name} = {p.expr}  (tied)")
    instrument = stack.extras.get("instrument")
    if instrument:
        lines += ["", "instrument: " + ", ".join(f"{k} = {v:g}" for k, v in instrument.items())]
    samples = stack.extras.get("samples")
    if samples:
        names = ", ".join(str(s.get("name", f"#{i}")) for i, s in enumerate(samples, start=1))
        lines += ["", f"samples: {len(samples)} ({names})"]
    lines += ["", "ok: the model file is valid"]
    return lines


def is_map_file(path: Path) -> bool:
    """True for a wafer-map file: a CSV whose header has a 'site' column, or NetCDF with a 'site' dim."""
    from ..data.readers import open_netcdf, read_csv_text

    try:
        if path.suffix.lower() in (".nc", ".netcdf", ".h5", ".nc4"):
            return "site" in open_netcdf(path).dims
        return "site" in read_csv_text(path).header
    except LaminaInputError:
        return False  # the measurement reader will report the problem


def inspect_map(path: Path) -> list[str]:
    """Summary lines of a wafer-map file (read by lamina.read_map, the reader of 'lamina map')."""
    import numpy as np

    from ..data.readers import describe_dataset
    from ..qa.maps import read_map

    ds = read_map(path)
    problems = [str(p) for p in ds["site_problem"].values]
    named = "wafer" in ds.coords and int(ds.attrs.get("wafer_column", 1))
    wafers = sorted(set(str(w) for w in ds["wafer"].values)) if named else []
    lines = [f"wafer-map file {path}", f"  sites: {ds.sizes['site']}" +
             (f" on {len(wafers)} wafer(s): {', '.join(wafers)}" if wafers else "")]
    x, y = ds["x_mm"].values, ds["y_mm"].values
    lines.append(f"  site positions: x {np.nanmin(x):g} .. {np.nanmax(x):g} mm, y {np.nanmin(y):g} .. {np.nanmax(y):g} mm")
    first_good = next(i for i, p in enumerate(problems) if not p)
    site = ds.isel(site=first_good).drop_vars(["site_problem"], errors="ignore")
    lines += ["  per site: " + line for line in describe_dataset(site)]
    bad = [(str(ds["site"].values[i]), p) for i, p in enumerate(problems) if p]
    if bad:
        lines.append(f"unreadable sites: {len(bad)} (a map fit records them as failed)")
        lines += [f"  site {label}: {problem}" for label, problem in bad[:10]]
        if len(bad) > 10:
            lines.append(f"  ... and {len(bad) - 10} more")
    lines.append("ok: the map file is readable" + (" (with unreadable sites)" if bad else ""))
    return lines


def inspect_data(path: Path) -> list[str]:
    """Summary lines of a measurement file (raises LaminaInputError on a bad file)."""
    from ..data.readers import describe_dataset, read_data

    if is_map_file(path):
        return inspect_map(path)
    ds = read_data(path)
    points = sum(int((~ds[q].isnull()).sum()) for q in ds.data_vars if not str(q).endswith("_err"))
    lines = [f"measurement file {path}", f"  sha256 {ds.attrs.get('sha256', '?')}"]
    lines += ["  " + line for line in describe_dataset(ds)]
    lines.append(f"  {points} measured values in all")
    meta = {k: v for k, v in ds.attrs.items() if k not in ("source_file", "sha256")}
    if meta:
        lines.append("metadata:")
        for key, value in meta.items():
            text = str(value).replace("\n", " / ")
            lines.append(f"  {key}: {text if len(text) <= 100 else text[:97] + '...'}")
    lines.append("ok: the measurement file is valid")
    return lines


__all__ = ["HELP", "EXAMPLE", "add_arguments", "run", "inspect_model", "inspect_data", "inspect_map"]
