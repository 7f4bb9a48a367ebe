"""`lamina demo`: a short tour on the bundled sample data (invented for demonstration).

The tour is the list `STEPS`: each step is a small function taking the
`DemoContext` (output folder, printing, a dict to hand results to later
steps); its docstring's first line is the step's title.  To add a step, write
a function and add it to `STEPS` in tour order.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

HELP = "run a short tour on the bundled sample data"
DESCRIPTION = (
    "Run a short tour of lamina on the bundled sample data (the fictitious 'Larkspur Optics\n"
    "pilot line'; all data invented for demonstration) and write what it makes to a folder."
)
EXAMPLE = "  lamina demo\n  lamina demo -o /tmp/lamina-demo --quiet\n"

DEFAULT_OUTDIR = "lamina-demo"


def add_arguments(parser) -> None:
    parser.add_argument("-o", "--output", default=DEFAULT_OUTDIR, metavar="DIR",
                        help=f"folder for the demo's outputs (default ./{DEFAULT_OUTDIR})")
    parser.add_argument("--quiet", action="store_true", help="print only the step titles")


@dataclass
class DemoContext:
    """What every step gets: where to write, how to talk, and what earlier steps left."""

    outdir: Path
    quiet: bool = False
    #: results handed from one step to the next (e.g. "simulated_file")
    state: dict = field(default_factory=dict)

    def say(self, text: str = "") -> None:
        if not self.quiet:
            print(text)

    def sample(self, *parts: str) -> Path:
        from ..data import sample_path
        return sample_path(*parts)


def _cli(argv: list[str]) -> int:
    """Run a lamina command in-process (same behaviour as the shell command)."""
    from .main import main
    return main(argv)


# ---------------------------------------------------------------------------
# steps
# ---------------------------------------------------------------------------

def step_inspect_model(ctx: DemoContext) -> None:
    """Inspect a model file: thermal oxide on silicon"""
    model = ctx.sample("oxide_on_si.toml")
    ctx.say(f"$ lamina inspect {model.name}")
    if ctx.quiet:
        from .inspect_cmd import inspect_model
        inspect_model(model)
    else:
        _require_ok(_cli(["inspect", str(model)]), "inspect")
    ctx.state["model"] = model


def step_simulate(ctx: DemoContext) -> None:
    """Simulate it: Psi and Delta at 65, 70, 75 degrees, with instrument-like noise"""
    model = ctx.state.get("model") or ctx.sample("oxide_on_si.toml")
    out = ctx.outdir / "oxide_simulated.csv"
    argv = ["simulate", str(model), "--wavelengths", "300:1000:10", "--angles", "65,70,75",
            "--quantities", "psi,delta", "--noise", "psi=0.02,delta=0.05", "--seed", "7", "-o", str(out)]
    ctx.say("$ lamina " + " ".join(argv[:1] + [model.name] + argv[2:]))
    _require_ok(_cli(argv + (["--quiet"] if ctx.quiet else [])), "simulate")
    ctx.state["simulated_file"] = out


def step_read_back(ctx: DemoContext) -> None:
    """Read the file back and look at a few numbers"""
    import numpy as np

    from ..data.readers import read_data
    from ..stack.modelfile import load_model

    path = ctx.state["simulated_file"]
    ds = read_data(path)
    stack = load_model(ctx.state.get("model") or ctx.sample("oxide_on_si.toml"))
    ctx.say(f"read {path}: {ds.sizes['angle']} angles x {ds.sizes['wavelength']} wavelengths")
    at = ds.sel(wavelength=ds["wavelength"].values[np.argmin(abs(ds["wavelength"].values - 630.0))])
    ctx.say(f"at {float(at['wavelength']):g} nm:   angle   Psi (deg)   Delta (deg)")
    for angle in ds["angle"].values:
        row = at.sel(angle=angle)
        ctx.say(f"{'':>14s}{angle:6g}   {float(row['psi']):9.3f}   {float(row['delta']):11.3f}")
    free = stack.free_parameters()
    if free:
        ctx.say("free parameters a fit would adjust: " + ", ".join(f"{k} = {p.value:g}" for k, p in free.items()))
    ctx.state["dataset"] = ds


def step_fit(ctx: DemoContext) -> None:
    """Fit the oxide thickness to a bundled measurement (Psi, Delta at 65, 70, 75 degrees)"""
    import json

    model = ctx.sample("oxide_on_si.toml")
    data = ctx.sample("oxide_on_si_ellips.csv")
    out = ctx.outdir / "fit_oxide"
    argv = ["fit", str(data), "--model", str(model), "-o", str(out)]
    ctx.say(f"$ lamina fit {data.name} --model {model.name} -o {out}")
    _require_ok(_cli(argv + (["--quiet"] if ctx.quiet else [])), "fit")
    result = json.loads((out / "result.json").read_text(encoding="utf-8"))
    fitted = result["parameters"]["oxide.thickness_nm"]
    truth = read_truth(data).get("oxide.thickness_nm")
    ctx.say(f"fitted oxide thickness {fitted['value']:.3f} nm +- {fitted['stderr']:.2g} nm (one sigma, from the "
            "noise alone; a real film's uncertainty is set mostly by how well the model fits the sample)")
    if truth is not None:
        ctx.say(f"the invented 'true' value written in the file header is {truth:g} nm")
    ctx.state["fit_dir"] = out


def read_truth(path: Path) -> dict[str, float]:
    """The `# true_<parameter>: value` lines of a bundled (synthetic) measurement file."""
    from ..data.readers import read_csv_text

    meta = read_csv_text(path).metadata
    return {k[len("true_"):]: float(v) for k, v in meta.items() if k.startswith("true_")}


#: the tour, in order; add a step by adding a function here
STEPS: list[Callable[[DemoContext], None]] = [step_inspect_model, step_simulate, step_read_back, step_fit]


def _require_ok(code: int, what: str) -> None:
    if code != 0:
        raise RuntimeError(f"the demo's '{what}' step exited with code {code}")


def step_title(step: Callable) -> str:
    doc = (step.__doc__ or step.__name__).strip()
    return doc.splitlines()[0]


def run(args) -> int:
    from ..errors import LaminaInputError

    outdir = Path(args.output)
    if outdir.exists() and not outdir.is_dir():
        raise LaminaInputError("exists and is not a folder", f"-o {args.output}", "a folder name")
    outdir.mkdir(parents=True, exist_ok=True)
    ctx = DemoContext(outdir=outdir, quiet=args.quiet)
    print("lamina demo: the fictitious Larkspur Optics pilot line (all data invented for demonstration)")
    for number, step in enumerate(STEPS, start=1):
        print(f"\n== {number}. {step_title(step)}")
        step(ctx)
    print(f"\ndone: outputs in {outdir}/")
    print("note: results depend on the model chosen; verify against traceable reference samples before "
          "any decision on real parts, which rests with local procedures and qualified staff.")
    return 0
