"""`lamina` command line: one subcommand per module in this package.

Each command module defines ``HELP`` (one line), ``EXAMPLE`` (shown in
``--help``), ``add_arguments(parser)`` and ``run(args) -> int``.  Modules are
imported only when their command runs, so ``lamina --help`` starts fast.

Exit codes (shared by all commands): 0 success / pass, 1 a spec or target
fails, 2 bad input, 3 a fit did not converge or sites failed.
"""
from __future__ import annotations

import argparse
import importlib
import sys

from ..errors import LaminaInputError

#: command name -> (module under lamina.cli, one-line help)
COMMANDS: dict[str, tuple[str, str]] = {
    "demo": ("demo", "run a short tour on the bundled sample data"),
    "materials": ("materials_cmd", "list the material library, or show n, k of one material"),
    "inspect": ("inspect_cmd", "summarise and validate a model or measurement file"),
    "simulate": ("simulate_cmd", "compute spectra of a model and write a measurement file"),
    "fit": ("fit_cmd", "fit a model's free parameters to measured spectra"),
    "invert": ("invert_cmd", "point-by-point n, k of one layer, wavelength by wavelength"),
    "map": ("map_cmd", "fit every site of a wafer map on dask and judge it against a spec"),
    "check": ("check_cmd", "check a coating recipe against target spectral bands"),
    "report": ("report_cmd", "rebuild report.html from an output folder"),
}

EXIT_OK, EXIT_FAIL, EXIT_INPUT, EXIT_NOT_CONVERGED = 0, 1, 2, 3


class _Parser(argparse.ArgumentParser):
    """argparse that exits with 2 and a one-line message (its default is also 2)."""

    def error(self, message):
        self.print_usage(sys.stderr)
        self.exit(EXIT_INPUT, f"lamina: error: {message}\n  hint: see 'lamina {self.prog.split()[-1]} --help'\n")


def _version() -> str:
    from .. import __version__
    return __version__


def build_parser(load: str | None = None) -> argparse.ArgumentParser:
    parser = _Parser(
        prog="lamina",
        description="Thin-film optical metrology: thickness and n, k from ellipsometry and R/T spectra.",
        epilog="example:\n  lamina demo\n  lamina fit sample.csv --model oxide.toml -o out/\n\n"
               "exit codes: 0 ok/pass, 1 spec fails, 2 bad input, 3 fit not converged or sites failed",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"lamina {_version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name, (module_name, help_text) in COMMANDS.items():
        if load is not None and name != load:
            sub.add_parser(name, help=help_text)
            continue
        module = importlib.import_module(f"lamina.cli.{module_name}")
        cmd = sub.add_parser(name, help=help_text, description=getattr(module, "DESCRIPTION", help_text),
                             epilog="example:\n" + getattr(module, "EXAMPLE", ""),
                             formatter_class=argparse.RawDescriptionHelpFormatter)
        module.add_arguments(cmd)
        cmd.set_defaults(_run=module.run)
    return parser


def main(argv: list[str] | None = None) -> int:
    code = _dispatch(argv)
    if argv is None:  # run as the `lamina` program: the process ends right after this
        # the interpreter's garbage collections at exit walk every object of the libraries a
        # command loaded (some 0.4 s after `lamina map`); every output is written and closed
        # by now, and atexit handlers still run, so leave the memory to the operating system
        import gc
        gc.freeze()
    return code


def _dispatch(argv: list[str] | None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    # import only the module of the command asked for
    command = next((a for a in argv if not a.startswith("-")), None)
    load = command if command in COMMANDS else None
    parser = build_parser(load if load else ("" if command is None else None))
    args = parser.parse_args(argv)
    if getattr(args, "command", None) is None:
        parser.print_help()
        return EXIT_OK
    try:
        return int(args._run(args) or 0)
    except LaminaInputError as exc:
        print(f"lamina: error: {exc}", file=sys.stderr)
        if exc.hint:
            print(f"  hint: {exc.hint}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("lamina: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
