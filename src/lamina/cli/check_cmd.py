"""`lamina check`: a coating recipe against a target: design, sensitivity, yield, measured part, colour."""
from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

HELP = "check a coating recipe against target spectral bands"
DESCRIPTION = (
    "Check a coating recipe (a model file with nominal thicknesses) against a target file:\n"
    "the design spectrum against every band and the colour, the thickness sensitivity of\n"
    "each layer, the Monte Carlo yield under the given tolerances, and (with --measured) a\n"
    "measured part against the bands with a diagnosis of which layer drifted.\n\n"
    "Results are model-dependent: verify against traceable reference samples; release\n"
    "decisions follow local procedures and are made by qualified staff."
)
EXAMPLE = ("  lamina check sample_data/coatings/ar4_recipe.toml --target sample_data/coatings/ar4_target.toml \\\n"
           "      --tolerances sample_data/coatings/ar4_tolerances.toml "
           "--measured sample_data/coatings/ar4_part_0412.csv -o check-out/\n\n"
           "exit codes: 0 every checked item passes, 1 any fails, 2 bad input")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("recipe", metavar="RECIPE", help="model file of the coating (nominal thicknesses)")
    parser.add_argument("--target", required=True, metavar="TARGET", help="target file (TOML: bands, colour)")
    parser.add_argument("--measured", nargs="+", default=[], metavar="FILE",
                        help="measurement file(s) of one coated part (merged)")
    parser.add_argument("--tolerances", metavar="FILE", help="tolerance file (TOML); or [tolerances] in TARGET")
    parser.add_argument("--trials", type=int, default=None, metavar="N", help="Monte Carlo trials (default 10000)")
    parser.add_argument("--seed", type=int, default=0, metavar="N", help="random seed of the Monte Carlo (default 0)")
    parser.add_argument("--quiet", action="store_true", help="print nothing but errors")
    parser.add_argument("-o", "--outdir", required=True, metavar="OUTDIR", help="output folder (created if missing)")


def _json_ready(value):
    """Replace non-finite floats by None so the JSON is strict."""
    if isinstance(value, dict):
        return {str(k): _json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_ready(v) for v in value]
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if hasattr(value, "item") and getattr(value, "ndim", 1) == 0:
        return _json_ready(value.item())
    return value


def _print_summary(report: dict) -> None:
    design = report["design"]
    print(f"design: {'PASS' if design['pass'] else 'FAIL'}")
    for band in design["bands"]:
        print(f"  {band['name']}: {'pass' if band['pass'] else 'FAIL'}  worst margin {band['worst_margin']:.4g}"
              f" at {band['at_nm']:g} nm")
    if "color" in design:
        color = design["color"]
        print(f"  colour: {'pass' if color['pass'] else 'FAIL'}  Delta E 2000 = {color['delta_e']:.2f}"
              f" (max {color['max_delta_e']:g})")
    if "sensitivity" in report:
        print("most critical layers: " + ", ".join(report["sensitivity"]["ranking"][:3]))
    if "yield" in report:
        y = report["yield"]
        verdict = "" if "pass" not in y else ("  PASS" if y["pass"] else "  FAIL")
        print(f"yield: {100 * y['pass_fraction']:.1f} % of {y['trials']} trials (95 % CI "
              f"{100 * y['ci95'][0]:.1f}-{100 * y['ci95'][1]:.1f} %), worst layer {y['worst_layer']}{verdict}")
    if "measured" in report:
        m = report["measured"]
        print(f"measured part: {'PASS' if m['pass'] else 'FAIL'}")
        for name, row in list(m.get("drift", {}).items())[:3]:
            print(f"  {name}: design {row['design']:.2f} nm, fitted {row['fitted']:.2f} nm "
                  f"({row['delta_pct']:+.2f} %)")
    print(f"overall: {'PASS' if report['pass'] else 'FAIL'}")


def run(args) -> int:
    from ..errors import LaminaInputError
    from ..qa.recipes import check_recipe

    if args.trials is not None and args.trials < 1:
        raise LaminaInputError(f"--trials {args.trials} is not positive", "--trials", "a positive integer")
    outdir = Path(args.outdir)
    if outdir.exists() and not outdir.is_dir():
        raise LaminaInputError("exists and is not a folder", str(outdir), "an output folder")
    report, plot_data = check_recipe(args.recipe, args.target, measured=args.measured,
                                     tolerances=args.tolerances, trials=args.trials, seed=args.seed)
    outdir.mkdir(parents=True, exist_ok=True)
    from ..data.writers import atomic_write_text
    atomic_write_text(outdir / "check.json", json.dumps(_json_ready(report), indent=2) + "\n")
    from ..report.plots_check import plot_check
    plot_check(plot_data, outdir)
    from ..report.html import write_report
    write_report(outdir)
    if not args.quiet:
        _print_summary(report)
    return 0 if report["pass"] else 1

