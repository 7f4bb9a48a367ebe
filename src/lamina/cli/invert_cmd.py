"""`lamina invert`: n and k of one layer, wavelength by wavelength.

Writes OUTDIR/nk.csv (wavelength_nm, n, k, n_err, k_err: readable by the
``table`` law), OUTDIR/invert.json (convergence, Kramers-Kronig check) and
OUTDIR/nk.png.  Exit 0 done, 3 some wavelengths did not converge, 2 bad input.
"""
from __future__ import annotations

import sys
from pathlib import Path

HELP = "point-by-point n, k of one layer, wavelength by wavelength"
DESCRIPTION = ("Solve n and k of one layer at every measured wavelength from all angles and quantities "
               "measured there, with every other part of the model (thicknesses included) fixed, e.g. "
               "at the values of an earlier 'lamina fit'. The table is then checked for Kramers-Kronig "
               "consistency by fitting a causal oscillator sum to it.")
EXAMPLE = ("  lamina fit film.csv --model film.toml -o fit/\n"
           "  lamina invert film.csv --model fit/fitted.toml --layer film -o nk/\n\n"
           "exit codes: 0 done, 3 some wavelengths did not converge (outputs still written), 2 bad input")

EXIT_OK, EXIT_NOT_CONVERGED = 0, 3


def add_arguments(parser) -> None:
    parser.add_argument("data", nargs="+", metavar="DATA", help="measurement files (merged on one grid)")
    parser.add_argument("--model", required=True, metavar="MODEL", help="model file (TOML); thicknesses are kept fixed")
    parser.add_argument("--layer", required=True, metavar="NAME", help="the layer whose n, k are solved")
    parser.add_argument("--quiet", action="store_true", help="no console summary")
    parser.add_argument("-o", "--output", required=True, metavar="OUTDIR", help="output folder (created if missing)")


def run(args) -> int:
    import json

    import lamina
    from ..data.writers import atomic_write_text
    from ..fit.invert import invert
    from .fit_cmd import check_outdir, make_outdir

    check_outdir(Path(args.output))
    stack = lamina.load_model(args.model)
    data = lamina.read_data(args.data if len(args.data) > 1 else args.data[0])
    result = invert(stack, data, args.layer)
    outdir = Path(args.output)
    make_outdir(outdir)
    header = (f"# n, k of layer '{args.layer}' by point-by-point inversion (lamina invert); "
              f"model {Path(args.model).name}\n")
    atomic_write_text(outdir / "nk.csv", header + result.table().to_csv(index=False, float_format="%.8g"))
    report = result.to_dict()
    report["provenance"] = _provenance(args, data)
    try:
        from ..report.plots_fit import write_nk_plot
        write_nk_plot(result, outdir / "nk.png")
    except ImportError as exc:  # pragma: no cover - matplotlib is a dependency
        report["warnings"].append(f"plot not written: {exc}")
    atomic_write_text(outdir / "invert.json", json.dumps(report, indent=2, allow_nan=False) + "\n")
    if not args.quiet:
        kk = report["kramers_kronig"]
        print(f"{result.wavelength_nm.size} wavelengths, "
              f"{int(result.converged.sum())} converged; n {result.n.min():.4g}-{result.n.max():.4g}, "
              f"k {result.k.min():.4g}-{result.k.max():.4g}")
        print(kk.get("note", ""))
        for warning in report["warnings"]:
            print(f"warning: {warning}")
        print(f"outputs in {outdir}")
    return EXIT_OK if result.success else EXIT_NOT_CONVERGED


def _provenance(args, data) -> dict:
    import datetime as dt

    from .. import __version__
    return {"lamina": __version__, "data_sha256": {str(data.attrs.get("source_file", "")): data.attrs.get("sha256")},
            "model": str(args.model), "created": dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds")}


if __name__ == "__main__":  # pragma: no cover
    from .main import main
    sys.exit(main(["invert"] + sys.argv[1:]))
