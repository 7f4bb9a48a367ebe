"""`lamina report OUTDIR`: rebuild OUTDIR/report.html from an existing output folder."""
from __future__ import annotations

HELP = "rebuild report.html from an output folder"
DESCRIPTION = (
    "Rebuild OUTDIR/report.html from the files a lamina command left in OUTDIR: result.json\n"
    "of a fit, summary.json and sites.csv of a wafer map, check.json of a recipe check, and\n"
    "the PNG plots and model files next to them. The report is one self-contained HTML file\n"
    "that opens offline; the files it reads are never changed.\n\n"
    "exit codes: 0 written, 2 OUTDIR holds none of result.json, summary.json, check.json\n"
    "            (or one of them is not valid JSON)"
)
EXAMPLE = "  lamina fit sample.csv --model oxide.toml -o out/\n  lamina report out/\n"


def add_arguments(parser) -> None:
    parser.add_argument("outdir", metavar="OUTDIR", help="folder written by lamina fit, map or check")
    parser.add_argument("--quiet", action="store_true", help="print nothing on success")


def run(args) -> int:
    from ..report.html import write_report
    path = write_report(args.outdir)
    if not args.quiet:
        print(f"wrote {path}")
    return 0
