"""`lamina demo`: a tour on the bundled sample data (invented for demonstration).

The tour is the list `STEPS`: each step is a small function taking the
`DemoContext` (output folder, printing, a dict to hand results to later
steps); its docstring's first line is the step's title.  To add a step, write
a function and add it to `STEPS` in tour order; mark it with `@slow` if it
takes more than a few seconds (``lamina demo --quick`` leaves those out).
Steps run the real commands in-process (`lamina.cli.main.main`), so the demo
shows exactly what a user would type and get.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

HELP = "run a short tour on the bundled sample data"
DESCRIPTION = (
    "Run a tour of lamina on the bundled sample data (the fictitious 'Larkspur Optics pilot\n"
    "line'; all data invented for demonstration): inspect and simulate a model, fit oxide and\n"
    "nitride films, extract n and k, fit a wafer map against a spec and check a coating recipe.\n"
    "Everything it makes, reports included, goes to one folder."
)
EXAMPLE = "  lamina demo\n  lamina demo -o /tmp/lamina-demo --quick --quiet\n"

DEFAULT_OUTDIR = "lamina-demo"


def add_arguments(parser) -> None:
    parser.add_argument("-o", "--output", default=DEFAULT_OUTDIR, metavar="DIR",
                        help=f"folder for the demo's outputs (default ./{DEFAULT_OUTDIR})")
    parser.add_argument("--quick", action="store_true",
                        help="leave out the slow steps (the wafer map on dask, the coating Monte Carlo)")
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

    def run(self, argv: list, what: str, expected=(0,), meaning: dict | None = None,
            has_quiet: bool = True) -> int:
        """Show and run one lamina command in-process; a code outside `expected` stops the demo.

        `has_quiet`: the command takes --quiet (passed on when the demo is quiet).
        """
        from .main import main

        root = self.sample()
        shown = [str(a.relative_to(root)) if isinstance(a, Path) and a.is_relative_to(root) else str(a) for a in argv]
        self.say("$ lamina " + " ".join(shown))
        quiet = ["--quiet"] if self.quiet and has_quiet and "--quiet" not in argv else []
        code = main([str(a) for a in argv] + quiet)
        if code not in expected:
            raise RuntimeError(f"the demo's '{what}' step exited with code {code} (expected {expected})")
        if meaning and code in meaning:
            self.say(f"(exit code {code}: {meaning[code]})")
        return code


def slow(step: Callable) -> Callable:
    """Mark a step as slow: `lamina demo --quick` leaves it out."""
    step.slow = True
    return step


# ---------------------------------------------------------------------------
# steps
# ---------------------------------------------------------------------------

def step_material(ctx: DemoContext) -> None:
    """Look up a material of the library: n and k of silica"""
    if ctx.quiet:
        from ..materials import get
        get("SiO2").nk([400.0, 632.8, 1000.0])
    else:
        ctx.run(["materials", "SiO2", "--wavelengths", "400,632.8,1000"], "materials", has_quiet=False)


def step_inspect_model(ctx: DemoContext) -> None:
    """Inspect a model file: thermal oxide on silicon"""
    model = ctx.sample("oxide_on_si.toml")
    if ctx.quiet:
        from .inspect_cmd import inspect_model
        inspect_model(model)
    else:
        ctx.run(["inspect", model], "inspect")
    ctx.state["model"] = model


def step_simulate(ctx: DemoContext) -> None:
    """Simulate it: Psi and Delta at 65, 70, 75 degrees, with instrument-like noise"""
    model = ctx.state.get("model") or ctx.sample("oxide_on_si.toml")
    out = ctx.outdir / "oxide_simulated.csv"
    ctx.run(["simulate", model, "--wavelengths", "300:1000:10", "--angles", "65,70,75", "--quantities",
             "psi,delta", "--noise", "psi=0.02,delta=0.05", "--seed", "7", "-o", out], "simulate")
    ctx.state["simulated_file"] = out


def step_read_back(ctx: DemoContext) -> None:
    """Read the file back and look at a few numbers"""
    import numpy as np

    from ..data.readers import read_data

    path = ctx.state["simulated_file"]
    ds = read_data(path)
    ctx.say(f"read {path}: {ds.sizes['angle']} angles x {ds.sizes['wavelength']} wavelengths")
    at = ds.sel(wavelength=ds["wavelength"].values[np.argmin(abs(ds["wavelength"].values - 630.0))])
    ctx.say(f"at {float(at['wavelength']):g} nm:   angle   Psi (deg)   Delta (deg)")
    for angle in ds["angle"].values:
        row = at.sel(angle=angle)
        ctx.say(f"{'':>14s}{angle:6g}   {float(row['psi']):9.3f}   {float(row['delta']):11.3f}")
    ctx.state["dataset"] = ds


def step_fit(ctx: DemoContext) -> None:
    """Fit the oxide thickness to a bundled measurement (Psi, Delta at 65, 70, 75 degrees)"""
    import json

    data = ctx.sample("oxide_on_si_ellips.csv")
    out = ctx.outdir / "oxide_fit"
    ctx.run(["fit", data, "--model", ctx.sample("oxide_on_si.toml"), "-o", out], "fit")
    result = json.loads((out / "result.json").read_text(encoding="utf-8"))
    fitted = result["parameters"]["oxide.thickness_nm"]
    ctx.say(f"fitted oxide thickness {fitted['value']:.3f} nm +- {fitted['stderr']:.2g} nm (one sigma, from the "
            "noise alone; a real film's uncertainty is set mostly by how well the model fits the sample)")
    truth = read_truth(data).get("oxide.thickness_nm")
    if truth is not None:
        ctx.say(f"the invented 'true' value written in the file header is {truth:g} nm")
    ctx.state["fit_dir"] = out


def step_fit_joint(ctx: DemoContext) -> None:
    """Fit a nitride film jointly to ellipsometry and normal-incidence reflectance"""
    out = ctx.outdir / "nitride_fit"
    ctx.run(["fit", ctx.sample("nitride_on_si_ellips.csv"), ctx.sample("nitride_on_si_reflectance.csv"),
             "--model", ctx.sample("nitride_on_si.toml"), "-o", out], "joint fit")
    ctx.state["nitride_fit"] = out


def step_invert(ctx: DemoContext) -> None:
    """Extract the nitride's n and k wavelength by wavelength, thicknesses held at the fit"""
    fitted = ctx.state.get("nitride_fit", ctx.outdir / "nitride_fit") / "fitted.toml"
    ctx.run(["invert", ctx.sample("nitride_on_si_ellips.csv"), "--model", fitted, "--layer", "nitride",
             "-o", ctx.outdir / "nitride_nk"], "invert")


@slow
def step_map(ctx: DemoContext) -> None:
    """Fit a wafer map on a local dask cluster and judge it against a spec"""
    maps = ctx.sample("maps")
    ctx.run(["map", maps / "oxide_map.csv", "--model", maps / "oxide_map_model.toml", "--spec",
             maps / "oxide_map_spec.toml", "--workers", "2", "-o", ctx.outdir / "map"], "map", expected=(0, 1),
            meaning={0: "every wafer within spec", 1: "a wafer fails its spec - wafer 08 does so on purpose"})


@slow
def step_check(ctx: DemoContext) -> None:
    """Check an anti-reflection coating recipe and a measured part against their targets"""
    coatings = ctx.sample("coatings")
    ctx.run(["check", coatings / "ar4_recipe.toml", "--target", coatings / "ar4_target.toml", "--tolerances",
             coatings / "ar4_tolerances.toml", "--measured", coatings / "ar4_part_0412.csv", "--trials", "2000",
             "-o", ctx.outdir / "check"], "check", expected=(0, 1),
            meaning={0: "design and part meet the targets", 1: "a target is missed - the sample part drifted on purpose"})


def step_reports(ctx: DemoContext) -> None:
    """Where the reports are"""
    reports = sorted(ctx.outdir.rglob("report.html"))
    for report in reports:
        print(f"  {report}")
    if not reports:
        print(f"  (no report.html under {ctx.outdir})")


def read_truth(path: Path) -> dict[str, float]:
    """The `# true_<parameter>: value` lines of a bundled (synthetic) measurement file."""
    from ..data.readers import read_csv_text

    meta = read_csv_text(path).metadata
    return {k[len("true_"):]: float(v) for k, v in meta.items() if k.startswith("true_")}


#: the tour, in order; add a step by adding a function here
STEPS: list[Callable[[DemoContext], None]] = [
    step_material, step_inspect_model, step_simulate, step_read_back, step_fit, step_fit_joint, step_invert,
    step_map, step_check, step_reports,
]


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
    steps = [s for s in STEPS if not (args.quick and getattr(s, "slow", False))]
    print("lamina demo: the fictitious Larkspur Optics pilot line (all data invented for demonstration)")
    for number, step in enumerate(steps, start=1):
        print(f"\n== {number}. {step_title(step)}")
        step(ctx)
    print(f"\ndone: outputs in {outdir}/")
    print("note: results depend on the model chosen; verify against traceable reference samples before "
          "any decision on real parts, which rests with local procedures and qualified staff.")
    return 0
