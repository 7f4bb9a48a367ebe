"""`lamina map`: fit every site of a wafer map on dask and judge it against a spec.

Exit codes: 0 every check passes (or no spec), 1 a spec limit fails, 2 bad
input, 3 one or more sites could not be read or fitted (3 wins over 1: a map
with holes cannot be released on the sites that did fit).
"""
from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

HELP = "fit every site of a wafer map on dask and judge it against a spec"
DESCRIPTION = (
    "Fit the model's free parameters at every site of a wafer map, in parallel on a dask cluster\n"
    "(a local one by default), then write per-site results, per-wafer statistics inside the edge\n"
    "exclusion, spec verdicts and wafer-map plots to OUTDIR.\n\n"
    "Results depend on the model; verify against traceable reference samples, and let local\n"
    "procedures and qualified staff decide what happens to a wafer.\n\n"
    "exit codes: 0 pass (or no spec), 1 a spec limit fails, 2 bad input,\n"
    "            3 sites could not be read or fitted (wins over 1)"
)
EXAMPLE = ("  lamina map wafer_map.csv --model oxide.toml --spec oxide_spec.toml -o map-out/\n"
           "  lamina map lot.nc --model oxide.toml --scheduler tcp://10.0.0.5:8786 -o lot-out/")


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value} workers: need at least 1")
    return value


def add_arguments(parser) -> None:
    parser.add_argument("mapfile", help="wafer map: long-form CSV (site, x_mm, y_mm, [wafer], measurement "
                                        "columns) or NetCDF (dims site, angle, wavelength)")
    parser.add_argument("--model", required=True, help="model file (TOML) whose free parameters are fitted")
    parser.add_argument("--spec", help="spec file (TOML): wafer size, edge exclusion, limits, uniformity")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=_positive_int, metavar="N",
                       help="worker processes of the local dask cluster (default: one per core)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="send the work to a running dask.distributed scheduler, e.g. tcp://host:8786")
    parser.add_argument("--chunk-size", type=_positive_int, metavar="SITES",
                        help="sites per dask task (default: about eight tasks per worker, at most 25 sites)")
    parser.add_argument("--quiet", action="store_true", help="no progress bar and no summary on the terminal")
    parser.add_argument("-o", "--output", required=True, metavar="OUTDIR", help="folder for the results")


def run(args) -> int:
    from ..qa import maps  # light: numpy only, so the fork server below starts at once

    if not args.scheduler:
        # the workers' imports (the plotting stack too: they draw the plots) overlap reading the inputs
        maps.prepare_local_workers(PLOT_MODULES)
    outdir = _output_folder(args.output, create=False)
    _refuse_overwriting_inputs(outdir, [args.mapfile, args.model, args.spec])
    stack, free, spec = _read_model_and_spec(args)
    # model and spec are good: start the workers now, so that they spawn while the map is read
    starting = _start_cluster(maps, args.workers, args.scheduler)
    _import_in_background(OUTPUT_MODULES)  # ready by the time the outputs are written
    try:
        dataset, geometry = _read_map_checked(args.mapfile, stack, spec)
        _output_folder(args.output, create=True)
    except BaseException:
        _discard_cluster(starting)
        raise
    session = starting.result()
    bar = _progress(dataset.sizes["site"], args.quiet)  # after start-up: its rate is the fitting rate
    try:
        outcomes = maps.fit_map(stack, dataset, session.client, chunk_size=args.chunk_size, progress=bar.update)
        bar.close()
        summary = _judge_and_write(args, outdir, stack, free, spec, dataset, geometry, outcomes, session)
    finally:
        bar.close()
        session.close()  # waits for the close started in the background, if any
    if not args.quiet:
        _print_summary(summary, free, outdir)
    return summary["exit_code"]


def _read_model_and_spec(args):
    """(stack, free parameter names, spec or None); bad input raises before any worker starts."""
    from ..errors import LaminaInputError
    from ..qa import specs
    from ..stack.modelfile import load_model
    stack = load_model(args.model)
    free = list(stack.free_parameters())
    if not free:
        raise LaminaInputError("the model has no free parameter", args.model,
                               "at least one parameter given as a table {value, min, max}")
    spec = specs.read_spec(args.spec, free) if args.spec else None
    return stack, free, spec


def _read_map_checked(mapfile, stack, spec):
    """The map and the wafer geometry, with every site on the wafer and the model covering the data."""
    from ..qa import maps, wafer
    dataset = maps.read_map(mapfile)
    geometry = spec.geometry if spec else wafer.guess_geometry(dataset["x_mm"].values, dataset["y_mm"].values)
    maps.check_on_wafer(dataset, geometry)
    stack.check_range(dataset["wavelength"].values)  # a model that cannot cover the data: exit 2
    return dataset, geometry


def _judge_and_write(args, outdir, stack, free, spec, dataset, geometry, outcomes, session) -> dict:
    """Results, summary and every output; the plots are drawn on the cluster while the tables are written."""
    from ..qa import maps
    units = {name: spec_.unit for name, spec_ in stack.specs().items() if name in free}
    results = maps.results_dataset(dataset, outcomes, free, geometry, spec, units)
    summary = maps.summarize(results, free, spec)
    summary["inputs"] = {"map": str(args.mapfile), "model": str(args.model),
                         "spec": str(args.spec) if args.spec else None}
    summary["exit_code"] = maps.exit_code(summary)
    write_outputs(outdir, results, summary, free, units, geometry, spec, client=session.client)
    closing = session.close_in_background()  # workers stop while the report is written
    from ..report.html import write_report
    write_report(outdir)
    closing.join()
    return summary


#: what writing the tables and the report imports in this process: imported in a thread while the
#: sites are fitted (the plots are drawn on the workers, so matplotlib never loads here)
OUTPUT_MODULES = ("scipy.io", "lamina.data.writers", "lamina.report.html", "jinja2")
#: what drawing the plots imports on a worker (some 0.3 s): preloaded by the fork server of local
#: workers, imported on first use by the workers of an external scheduler
PLOT_MODULES = ("matplotlib.figure", "matplotlib.backends.backend_agg", "scipy.interpolate",
                "lamina.report.plots_map")


def _import_in_background(modules) -> None:
    import importlib
    import threading

    def load():
        for name in modules:
            try:
                importlib.import_module(name)
            except Exception:  # the real import later reports any problem
                return
    threading.Thread(target=load, name="lamina-map-imports", daemon=True).start()


def _start_cluster(maps, workers, scheduler):
    """A future of the MapCluster, started in a thread (its failure surfaces at .result())."""
    from concurrent.futures import ThreadPoolExecutor
    pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="lamina-map-start")
    future = pool.submit(maps.MapCluster, workers=workers, scheduler=scheduler)
    pool.shutdown(wait=False)  # the thread ends by itself once the cluster is up
    return future


def _discard_cluster(starting) -> None:
    """Stop a cluster started for a run that turned out to have bad input (its own errors are moot)."""
    try:
        session = starting.result()
    except Exception:  # e.g. an unreachable scheduler: the input error raised first wins
        return
    session.close()


def _output_folder(text: str, create: bool) -> Path:
    """OUTDIR checked (not a file); created only when `create` (after the inputs proved good)."""
    from ..errors import LaminaInputError
    outdir = Path(text)
    if outdir.exists() and not outdir.is_dir():
        raise LaminaInputError("exists and is not a folder", str(outdir), "a folder for the results")
    if not create:
        return outdir
    try:
        outdir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise LaminaInputError(f"cannot create the folder: {exc.strerror}", str(outdir), "a writable folder") \
            from None
    return outdir


OUTPUT_NAMES = ("sites.csv", "results.nc", "summary.json", "wafers.csv", "report.html")
PLOT_PREFIXES = ("map_", "histogram_", "radial_", "trend_")


def _refuse_overwriting_inputs(outdir: Path, inputs) -> None:
    """Bad input if an output would replace an input file (never change an input)."""
    from ..errors import LaminaInputError
    for name in inputs:
        if not name:
            continue
        path = Path(name)
        if path.resolve().parent != outdir.resolve():
            continue
        if path.name in OUTPUT_NAMES or (path.name.startswith(PLOT_PREFIXES) and path.suffix == ".png"):
            raise LaminaInputError(f"the output {path.name} would overwrite this input file", str(path),
                                   "an output folder (-o) other than the input's folder, or another file name")


class _NoBar:
    def update(self, n=1):
        pass

    def close(self):
        pass


def _progress(total: int, quiet: bool):
    """tqdm on a terminal; nothing when stderr is redirected or --quiet."""
    if quiet or not sys.stderr.isatty():
        return _NoBar()
    from tqdm import tqdm
    return tqdm(total=total, unit="site", desc="fitting sites", file=sys.stderr, leave=False)


# -- outputs --------------------------------------------------------------------------------

def write_outputs(outdir: Path, results, summary: dict, parameters: list[str], units: dict, geometry, spec,
                  client=None):
    """sites.csv, results.nc, summary.json, plots, and for several wafers wafers.csv and trend plots.

    With a dask `client` the plots are drawn on its workers (each plot is one task) while the
    tables are written here; the PNG bytes come back and are written here, so workers need no
    access to OUTDIR.
    """
    from ..data.writers import atomic_write_text, write_netcdf_file
    jobs = plot_jobs(results, summary, parameters, units, geometry, spec)
    drawn = _draw_on(client, jobs) if client is not None else None
    atomic_write_text(outdir / "sites.csv", sites_csv(results, parameters))
    write_netcdf_file(results, outdir / "results.nc")
    atomic_write_text(outdir / "summary.json", json.dumps(_json_safe(summary), indent=2) + "\n")
    if summary["n_wafers"] > 1:
        atomic_write_text(outdir / "wafers.csv", wafers_csv(summary, parameters))
    if drawn is None:
        from ..report import plots_map
        drawn = [plots_map.render(kind, *arguments) for _, kind, arguments in jobs]
    for (name, _, _), png in zip(jobs, drawn):
        _write_bytes(outdir / name, png)


def _draw_on(client, jobs):
    """The PNG bytes of every plot job, in order, drawn on the cluster's workers in parallel."""
    from ..report.plots_map import render  # a light module: matplotlib loads only inside the plot functions
    futures = [client.submit(render, kind, *arguments, pure=False) for _, kind, arguments in jobs]
    return (future.result() for future in futures)


def _write_bytes(path: Path, data: bytes) -> None:
    from ..data.writers import atomic_write
    with atomic_write(path, "wb") as handle:
        handle.write(data)


def _csv_cell(value) -> str:
    if isinstance(value, float):
        return "" if math.isnan(value) else repr(value)
    text = str(value)
    if any(ch in text for ch in ',"\n\r'):
        return '"' + text.replace('"', '""') + '"'
    return text


def sites_csv(results, parameters: list[str]) -> str:
    """site, x_mm, y_mm, [wafer], status, pass, reduced_chi2, <name>, <name>.stderr ..., reason."""
    with_wafer = bool(results.attrs.get("wafer_column", 0))
    columns = ["site", "x_mm", "y_mm"] + (["wafer"] if with_wafer else []) + ["status", "pass", "reduced_chi2"]
    for name in parameters:
        columns += [name, f"{name}.stderr"]
    columns.append("reason")
    verdict_text = {1: "true", 0: "false", -1: ""}
    cells_by_column = {}
    for column in columns:
        values = results[column].values
        if column == "pass":
            cells_by_column[column] = [verdict_text[int(v)] for v in values]
        elif values.dtype.kind == "f":
            cells_by_column[column] = [_csv_cell(float(v)) for v in values]
        else:
            cells_by_column[column] = [_csv_cell(str(v)) for v in values]
    lines = [",".join(columns)]
    lines += [",".join(row) for row in zip(*(cells_by_column[c] for c in columns))]
    return "\n".join(lines) + "\n"


def wafers_csv(summary: dict, parameters: list[str]) -> str:
    from ..qa.maps import wafer_table
    rows = wafer_table(summary, parameters)
    columns = list(rows[0])
    lines = [",".join(columns)]
    for row in rows:
        lines.append(",".join(_csv_cell(float(row[c]) if isinstance(row[c], float) else row[c]) for c in columns))
    return "\n".join(lines) + "\n"


def _json_safe(value):
    """NaN and infinities become null (JSON has no such numbers); numpy scalars become Python ones."""
    if isinstance(value, dict):
        return {str(k): _json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_safe(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _safe_name(text: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "._-" else "_" for ch in text)


def plot_jobs(results, summary: dict, parameters: list[str], units: dict, geometry, spec) -> list[tuple]:
    """(file name, plot kind, arguments of `plots_map.render`) of every plot; each is independent."""
    wafers = list(summary["wafers"])
    jobs = []
    for name in parameters:
        unit = units.get(name, "")
        limits = spec.limits.get(name) if spec is not None else None
        for wafer in wafers:
            part = results.isel(site=(results["wafer"].values == wafer).nonzero()[0])
            suffix = f"_{_safe_name(wafer)}" if len(wafers) > 1 else ""
            title = f"{name}" + (f", wafer {wafer}" if len(wafers) > 1 else "")
            jobs.append((f"map_{_safe_name(name)}{suffix}.png", "wafer_map",
                         (part, name, geometry, unit, title, limits)))
        jobs.append((f"histogram_{_safe_name(name)}.png", "histogram", (results, name, unit, limits)))
        jobs.append((f"radial_{_safe_name(name)}.png", "radial_profile", (results, name, geometry, unit, limits)))
        if len(wafers) > 1:
            jobs.append((f"trend_{_safe_name(name)}.png", "trend", (summary, name, unit, limits)))
    return jobs


def write_plots(outdir: Path, results, summary: dict, parameters: list[str], units: dict, geometry, spec):
    """Every plot, drawn here one after the other."""
    from ..report import plots_map
    for name, kind, arguments in plot_jobs(results, summary, parameters, units, geometry, spec):
        _write_bytes(outdir / name, plots_map.render(kind, *arguments))


def _print_summary(summary: dict, parameters: list[str], outdir: Path) -> None:
    for wafer, entry in summary["wafers"].items():
        verdict = {None: "not judged (no spec)", True: "PASS", False: "FAIL"}[entry["pass"]]
        print(f"wafer {wafer}: {entry['n_sites']} sites, {entry['n_failed']} failed, {verdict}")
        for name in parameters:
            stats = entry["parameters"][name]
            if stats["n_sites"]:
                print(f"  {name}: mean {stats['mean']:.4g}  range {stats['range']:.3g}  "
                      f"nonuniformity {stats['nonuniformity_pct']:.3g} %  ({stats['n_sites']} sites in zone)")
        for reason in entry["reasons"]:
            print(f"  - {reason}")
    print(f"results in {outdir}/ (exit code {summary['exit_code']})")
    if any(entry["pass"] is not None for entry in summary["wafers"].values()):
        print(f"note: {summary['caution']}")
