"""`lamina fit`: fit a model's free parameters to one or more measurement files.

Outputs in OUTDIR: result.json, fitted.toml, fit.csv and PNG plots; a short
table on the console unless --quiet.  Exit 0 fitted, 3 not converged (outputs
still written, marked "converged": false), 2 bad input.
"""
from __future__ import annotations

import os
import sys
from pathlib import Path

HELP = "fit a model's free parameters to measured spectra"
DESCRIPTION = ("Fit every free parameter of a model file (a table {value, min, max}) to all given "
               "measurement files at once, by weighted least squares. Several files of one sample "
               "(ellipsometry and R/T) are fitted together; a model with [[samples]] fits several "
               "samples that share optical constants (data files from the model, or given here in "
               "sample order).")
EXAMPLE = ("  lamina fit oxide_65_70_75.csv --model oxide_on_si.toml -o out/\n"
           "  lamina fit thick.csv --model oxide_on_si.toml --global -o out/   # far from the start\n"
           "  lamina fit --model three_wafers.toml -o out/                     # data named in [[samples]]\n\n"
           "exit codes: 0 fitted, 3 not converged (outputs still written), 2 bad input\n"
           "results are model-dependent: verify against traceable reference samples (docs/fitting.md)")

EXIT_OK, EXIT_NOT_CONVERGED = 0, 3


def add_arguments(parser) -> None:
    parser.add_argument("data", nargs="*", metavar="DATA",
                        help="measurement files (CSV or NetCDF); optional when the model's [[samples]] name them")
    parser.add_argument("--model", required=True, metavar="MODEL", help="model file (TOML)")
    parser.add_argument("--global", dest="global_search", action="store_true",
                        help="search globally (thickness scan, differential evolution) before the local fit")
    parser.add_argument("--quiet", action="store_true", help="no console summary")
    parser.add_argument("-o", "--output", required=True, metavar="OUTDIR", help="output folder (created if missing)")


def load_inputs(args):
    """Stack, samples and data (a list, or a dict by sample) from the command line."""
    import lamina
    from ..errors import LaminaInputError
    from ..fit.samples import parse_samples

    stack = lamina.load_model(args.model)
    samples = parse_samples(stack, where=f"{args.model}: samples")
    model_dir = Path(args.model).resolve().parent
    if samples:
        if args.data:
            if len(args.data) != len(samples):
                raise LaminaInputError(f"{len(args.data)} data files for {len(samples)} samples", "DATA",
                                       "one file per [[samples]] entry, in order, or none (files from the model)")
            data = {s.name: [lamina.read_data(p)] for s, p in zip(samples, args.data)}
        else:
            data = {}
            for i, s in enumerate(samples, start=1):
                if not s.data:
                    raise LaminaInputError(f"sample '{s.name}' names no data file", f"{args.model}: samples[{i}].data",
                                           "data = \"file.csv\" or DATA files on the command line")
                data[s.name] = [lamina.read_data(model_dir / p) for p in s.data]
    else:
        if not args.data:
            raise LaminaInputError("no measurement file given", "DATA", "one or more measurement files")
        data = [lamina.read_data(p) for p in args.data]
    return stack, samples, data


def run(args) -> int:
    from ..fit.engine import fit

    outdir = Path(args.output)
    check_outdir(outdir)
    stack, samples, data = load_inputs(args)
    result = fit(stack, data, global_search=args.global_search, samples=samples,
                 model_label=str(args.model))
    write_outputs(result, outdir, model_path=args.model)
    from ..report.html import write_report
    write_report(outdir)
    if not args.quiet:
        print(result.summary_table())
        print(f"outputs in {outdir}{os.sep}")
    return EXIT_OK if result.success else EXIT_NOT_CONVERGED


def write_outputs(result, outdir: Path, model_path=None) -> None:
    """result.json, fitted.toml, fit.csv and the plots, each written atomically."""
    from ..data.writers import atomic_write_text
    from ..stack.modelfile import save_model

    make_outdir(outdir)
    stack = result.stack
    if model_path is not None and isinstance(stack.extras.get("samples"), list):
        stack.extras = dict(stack.extras, samples=_rebased_samples(stack.extras["samples"], Path(model_path), outdir))
    save_model(stack, outdir / "fitted.toml")
    atomic_write_text(outdir / "fit.csv", result.points.to_csv(index=False, float_format="%.10g"))
    try:
        from ..report.plots_fit import write_fit_plots
        write_fit_plots(result, outdir)
    except ImportError as exc:  # matplotlib missing: the numbers still count
        result.warnings.append(f"plots not written: {exc}")
    atomic_write_text(outdir / "result.json", result.to_json())


def check_outdir(outdir: Path) -> None:
    """A file where OUTDIR should be is an input error (checked before any work)."""
    from ..errors import LaminaInputError
    if outdir.exists() and not outdir.is_dir():
        raise LaminaInputError("exists and is not a folder", str(outdir), "a folder name for the outputs (-o)")


def make_outdir(outdir: Path) -> None:
    """Create OUTDIR (and parents); problems are input errors, not tracebacks."""
    from ..errors import LaminaInputError
    check_outdir(outdir)
    try:
        outdir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise LaminaInputError(f"cannot create the output folder ({exc.strerror})", str(outdir),
                               "a writable folder") from None


def _rebased_samples(raw: list, model_path: Path, outdir: Path) -> list:
    """Sample data paths rewritten relative to OUTDIR so fitted.toml finds them."""
    source = model_path.resolve().parent
    out = []
    for entry in raw:
        entry = dict(entry)
        files = entry.get("data")
        if isinstance(files, (str, list)):
            single = isinstance(files, str)
            names = [files] if single else list(files)
            names = [f if Path(f).is_absolute() else
                     Path(os.path.relpath((source / f).resolve(), outdir.resolve())).as_posix() for f in names]
            entry["data"] = names[0] if single else names
        out.append(entry)
    return out


if __name__ == "__main__":  # pragma: no cover
    from .main import main
    sys.exit(main(["fit"] + sys.argv[1:]))
