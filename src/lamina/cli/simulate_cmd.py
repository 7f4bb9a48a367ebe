"""`lamina simulate`: spectra of a model written as a measurement file (synthetic data)."""
from __future__ import annotations

import hashlib
import math
from pathlib import Path

import numpy as np

from ..errors import LaminaInputError

HELP = "compute spectra of a model and write a measurement file"
DESCRIPTION = (
    "Compute Psi, Delta, R, T (and Rs, Rp, Ts, Tp) of a model file on a grid of wavelengths and\n"
    "angles of incidence and write them as a measurement file (.csv or .nc) that 'lamina fit'\n"
    "and 'lamina inspect' read.  With --noise, Gaussian noise of the given one-sigma size is\n"
    "added and the uncertainty columns are written.  The file says it holds synthetic data."
)
EXAMPLE = ("  lamina simulate oxide.toml --wavelengths 300:1000:2 --angles 65,70,75 -o oxide.csv\n"
           "  lamina simulate oxide.toml --wavelengths 400,500,600 --angles 70 \\\n"
           "      --noise psi=0.02,delta=0.05 --seed 1 -o noisy.nc\n")

#: quantities simulate writes, in file order (those the measurement format knows)
WRITTEN = ("psi", "delta", "R", "T", "Rs", "Rp", "Ts", "Tp")
MAX_POINTS = 2_000_000


def add_arguments(parser) -> None:
    parser.add_argument("model", help="model file (.toml)")
    parser.add_argument("--wavelengths", default="300:1000:5", metavar="SPEC",
                        help="START:STOP:STEP in nm (both ends included) or a comma list (default 300:1000:5)")
    parser.add_argument("--angles", default="70", metavar="SPEC",
                        help="angles of incidence in degrees: a comma list or START:STOP:STEP (default 70)")
    parser.add_argument("--quantities", default=",".join(WRITTEN), metavar="LIST",
                        help=f"quantities to write (default {','.join(WRITTEN)})")
    parser.add_argument("--noise", default=None, metavar="Q=SIGMA,...",
                        help="one-sigma Gaussian noise per quantity, e.g. psi=0.02,delta=0.05,R=0.002")
    parser.add_argument("--seed", type=int, default=None, help="seed of the noise generator (reproducible noise)")
    parser.add_argument("--quiet", action="store_true", help="print nothing on success")
    parser.add_argument("-o", "--output", required=True, metavar="OUT",
                        help="output measurement file: .csv or .nc (its folder is created if missing)")


# ---------------------------------------------------------------------------
# argument parsing (pure functions, tested directly)
# ---------------------------------------------------------------------------

def parse_grid(spec: str, option: str, unit: str) -> np.ndarray:
    """'START:STOP:STEP' (STOP included when reached by whole steps) or 'a,b,c' -> sorted unique floats."""
    text = str(spec).strip()
    where = f"--{option} {text}"
    if ":" in text:
        parts = text.split(":")
        if len(parts) != 3:
            raise LaminaInputError("a range needs three numbers", where, f"START:STOP:STEP in {unit}, e.g. 300:1000:2")
        start, stop, step = (_number(p, where) for p in parts)
        if step <= 0 or stop < start:
            raise LaminaInputError("empty range", where, "STOP >= START and STEP > 0")
        count = math.floor((stop - start) / step * (1 + 1e-12) + 1e-9) + 1
        if count > MAX_POINTS:
            raise LaminaInputError(f"{count} points is too many", where, f"at most {MAX_POINTS} points")
        values = start + step * np.arange(count)
    else:
        values = np.array([_number(p, where) for p in text.split(",") if p.strip() != ""] or [math.nan])
        if np.isnan(values).any():
            raise LaminaInputError("no numbers", where, f"a comma list of numbers in {unit}")
    values = np.unique(np.round(values, 9))
    return values


def _number(text: str, where: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise LaminaInputError(f"'{text.strip()}' is not a number", where, "numbers") from None
    if not math.isfinite(value):
        raise LaminaInputError(f"'{text.strip()}' is not a finite number", where, "finite numbers")
    return value


def parse_noise(spec: str | None) -> dict[str, float]:
    """'psi=0.02,delta=0.05' -> {'psi': 0.02, 'delta': 0.05} (quantity names as in --quantities)."""
    if spec is None or not spec.strip():
        return {}
    noise: dict[str, float] = {}
    for item in spec.split(","):
        key, sep, value = item.partition("=")
        key = key.strip()
        where = f"--noise {spec}"
        if not sep or key not in WRITTEN:
            raise LaminaInputError(f"'{item.strip()}' is not QUANTITY=SIGMA", where,
                                   "QUANTITY=SIGMA with QUANTITY one of " + ", ".join(WRITTEN))
        sigma = _number(value, where)
        if sigma < 0:
            raise LaminaInputError(f"{key} sigma {sigma:g} is negative", where, "a sigma >= 0")
        noise[key] = sigma
    return noise


def parse_quantities(spec: str) -> list[str]:
    names = [q.strip() for q in str(spec).split(",") if q.strip()]
    for name in names:
        if name not in WRITTEN:
            raise LaminaInputError(f"unknown quantity '{name}'", f"--quantities {spec}", "names among " + ",".join(WRITTEN))
    if not names:
        raise LaminaInputError("no quantity", f"--quantities {spec}", "names among " + ",".join(WRITTEN))
    return [q for q in WRITTEN if q in names]


def check_output(output: str, inputs: list[Path]) -> Path:
    out = Path(output)
    if out.suffix.lower() not in (".csv", ".nc"):
        raise LaminaInputError(f"unknown output type '{out.suffix or '(none)'}'", f"-o {output}",
                               "a file name ending in .csv or .nc")
    for source in inputs:
        if out.exists() and out.resolve() == source.resolve():
            raise LaminaInputError("the output would overwrite an input file", f"-o {output}", "another file name")
    parent = out.parent if str(out.parent) else Path(".")
    for folder in (parent, *parent.parents):
        if folder.exists():
            if not folder.is_dir():
                raise LaminaInputError(f"'{folder}' is a file, not a folder", f"-o {output}", "a path inside a folder")
            break
    if out.is_dir():
        raise LaminaInputError("is a folder", f"-o {output}", "a file name ending in .csv or .nc")
    return out


# ---------------------------------------------------------------------------
# the work
# ---------------------------------------------------------------------------

def instrument_of(stack):
    """The model's [instrument] section as an optics Instrument, or None when absent or all zero."""
    settings = stack.extras.get("instrument") or {}
    if not any(settings.values()):
        return None
    from ..optics.averaging import Instrument
    return Instrument(**settings)


def simulate_dataset(stack, wavelength_nm, angle_deg, quantities, noise=None, seed=None):
    """Simulated measurement Dataset: the chosen quantities, plus noise and `_err` variables if asked."""
    import lamina

    stack.check_range(wavelength_nm)  # a clear message naming the material before any work
    instrument = instrument_of(stack)
    kwargs = {"instrument": instrument} if instrument is not None else {}
    full = lamina.simulate(stack, wavelength_nm=wavelength_nm, angle_deg=angle_deg, **kwargs)
    missing = [q for q in quantities if q not in full.data_vars]
    if missing:
        raise LaminaInputError(f"the optics engine gives no {', '.join(missing)}", "--quantities",
                               "quantities among " + ", ".join(q for q in WRITTEN if q in full.data_vars))
    ds = full[list(quantities)].transpose("angle", "wavelength").copy()
    # keep the engine's statement of conventions; the rest of its attrs is replaced by our header
    ds.attrs = {k: v for k, v in full.attrs.items() if k == "conventions"}
    for name in quantities:
        if not np.isfinite(ds[name].values).all():
            raise LaminaInputError(f"{name} is undefined at some points of this grid", "--quantities",
                                   f"a grid where {name} is defined, or --quantities without {name}")
    return add_noise(ds, noise or {}, seed)


def add_noise(ds, noise: dict[str, float], seed=None):
    """Add Gaussian noise (one sigma per quantity) and write the sigma as the `_err` variable."""
    from ..data.readers import variable_attrs

    rng = np.random.default_rng(seed)
    for name in WRITTEN:  # a fixed order: the same seed gives the same noise
        sigma = noise.get(name)
        if sigma is None or name not in ds.data_vars:
            continue
        values = ds[name].values + rng.normal(0.0, sigma, ds[name].shape) if sigma > 0 else ds[name].values
        if name == "delta":
            values = np.mod(values, 360.0)
        ds[name] = (("angle", "wavelength"), values, variable_attrs(name))
        if sigma > 0:
            ds[f"{name}_err"] = (("angle", "wavelength"), np.full(ds[name].shape, sigma), variable_attrs(f"{name}_err"))
    return ds


def header(model_path: Path, stack, args, noise) -> tuple[list[str], dict[str, str]]:
    from .. import __version__

    comments = ["SYNTHETIC DATA computed by 'lamina simulate' from a model - not a measurement"]
    meta = {
        "data_kind": "synthetic",
        "generator": f"lamina {__version__} simulate",
        "model_file": str(model_path),
        "model_sha256": hashlib.sha256(model_path.read_bytes()).hexdigest(),
        "wavelengths_nm": args.wavelengths,
        "angles_deg": args.angles,
        "noise": ", ".join(f"{k}={v:g}" for k, v in noise.items()) or "none",
    }
    if stack.name:
        meta["model_name"] = stack.name
    if noise:
        meta["seed"] = "none (not reproducible)" if args.seed is None else str(args.seed)
    if stack.extras.get("instrument"):
        meta["instrument"] = ", ".join(f"{k}={v:g}" for k, v in stack.extras["instrument"].items())
    for name, param in stack.parameters().items():
        if name.startswith("ambient."):
            continue
        meta[f"param_{name}"] = f"{param.value:.10g}"
    return comments, meta


def run(args) -> int:
    from ..data.writers import write_data
    from ..stack.modelfile import load_model

    model_path = Path(args.model)
    out = check_output(args.output, [model_path])
    wavelength_nm = parse_grid(args.wavelengths, "wavelengths", "nm")
    if wavelength_nm.min() <= 0:
        raise LaminaInputError("wavelengths must be positive", f"--wavelengths {args.wavelengths}", "wavelengths > 0 nm")
    angle_deg = parse_grid(args.angles, "angles", "deg")
    if angle_deg.min() < 0 or angle_deg.max() >= 90:
        raise LaminaInputError("angle outside [0, 90)", f"--angles {args.angles}", "0 <= angle < 90 degrees")
    quantities = parse_quantities(args.quantities)
    noise = parse_noise(args.noise)
    unused = sorted(set(noise) - set(quantities))
    if unused:
        raise LaminaInputError(f"noise for {', '.join(unused)}, which is not written", f"--noise {args.noise}",
                               "noise only for the written --quantities")
    stack = load_model(model_path)
    ds = simulate_dataset(stack, wavelength_nm, angle_deg, quantities, noise, args.seed)
    comments, meta = header(model_path, stack, args, noise)
    # the output folder is made only now, when everything has been checked and computed
    out.parent.mkdir(parents=True, exist_ok=True)
    write_data(ds, out, comments=comments, metadata=meta)
    if not args.quiet:
        print(f"wrote {out}: {angle_deg.size} angle(s) x {wavelength_nm.size} wavelength(s) = "
              f"{angle_deg.size * wavelength_nm.size} points; {', '.join(quantities)}"
              + (f"; noise {meta['noise']}" if noise else "") + " (synthetic data)")
    return 0
