"""Wafer maps: read a map file, fit every site on dask, summarise against a spec.

Map files
---------
CSV (long form): one row per site, angle and wavelength; the columns ``site``,
``x_mm``, ``y_mm`` (mm, origin at the wafer centre), optional ``wafer``, plus
the columns of a measurement file (``wavelength_nm``, ``angle_deg``,
``psi_deg``, ``delta_deg``, ``R``, ``T`` and their ``*_err``), which are
parsed by the measurement-file reader, site by site.

NetCDF: dims (``site``, ``angle``, ``wavelength``), coordinates ``x_mm``,
``y_mm`` (and optional ``wafer``) along ``site``, variables as from
``lamina.read_data``.

Bad file or bad site
--------------------
Anything that breaks the structure of the file is bad input (LaminaInputError,
exit 2): a missing or unreadable file, a missing required column, a row with
the wrong number of fields, an empty site label, non-numeric or non-finite
coordinates, a site whose rows disagree on its coordinates or wafer, a site off
the wafer, or a file in which no site at all can be read.

A problem confined to the measured values of one site (non-numeric or missing
values, a wavelength/angle grid different from the rest of the map, duplicated
rows, values out of range) makes only that site *unreadable*: `read_map` keeps
the site with NaN data and its reason in the ``site_problem`` variable, the fit
records it as failed, and the rest of the map carries on (exit 3).

Fitting
-------
`fit_map` sends the work to a dask.distributed cluster: the reference site of
each wafer (the usable site nearest the centre) is fitted first with the global
search; the other sites start from its result and are fitted in chunks (one
task per chunk, so that task overhead stays small); sites whose reduced
chi-square is an outlier are fitted again with the global search.  A site that
cannot be fitted is recorded with its reason and never stops the map.
"""
from __future__ import annotations

import contextlib
import logging
import math
import os
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Iterable

import numpy as np

from ..errors import LaminaInputError
from .wafer import WaferGeometry, map_statistics, reference_site

if TYPE_CHECKING:
    import xarray as xr  # imported where used: `lamina map` starts its workers before paying for xarray

#: columns that say where a row belongs (everything else goes to the measurement reader)
SITE_COLUMNS = ("site", "x_mm", "y_mm")
WAFER_COLUMN = "wafer"
#: label of the single wafer of a map without a wafer column
DEFAULT_WAFER = "1"

#: carried in every summary: a verdict here is an input to a decision, not the decision
CAUTION = ("Results depend on the model; verify against traceable reference samples. Whether a wafer is "
           "released, reworked or scrapped follows local procedures and is decided by qualified staff.")

#: outlier rule for the second global search: reduced chi2 above both
OUTLIER_FACTOR = 5.0
OUTLIER_FLOOR = 3.0

#: environment of worker processes: one BLAS/OpenMP thread each (the cluster
#: supplies the parallelism; nested threads on 2 cores only fight)
WORKER_ENV = {name: "1" for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS",
                                     "NUMEXPR_NUM_THREADS", "VECLIB_MAXIMUM_THREADS")}


# ----------------------------------------------------------------------------
# reading
# ----------------------------------------------------------------------------

def read_map(path) -> xr.Dataset:
    """Read a wafer map (CSV or NetCDF) into a Dataset with dims (site, angle, wavelength).

    Coordinates: ``site`` (labels), ``x_mm``, ``y_mm``, ``wafer`` along site.
    ``site_problem`` (str along site) is "" for a good site and the reason for
    a site whose data could not be read (its values are NaN).  The attribute
    ``wafer_column`` is 1 when the file named its wafers.
    """
    path = Path(path)
    if not path.is_file():
        raise LaminaInputError("file not found", str(path), "an existing map file (.csv or .nc)")
    suffix = path.suffix.lower()
    if suffix in (".nc", ".h5", ".netcdf", ".nc4"):
        dataset = _read_map_netcdf(path)
    else:
        dataset = _read_map_csv(path)
    if not (dataset["site_problem"].values == "").any():
        first = str(dataset["site_problem"].values[0])
        raise LaminaInputError(f"no site can be read (first site: {first})", str(path),
                               "at least one site with valid measurements")
    dataset.attrs["source_file"] = str(path)
    return dataset


def _site_coordinates(table, name: str, label: str) -> np.ndarray:
    """Numbers of a coordinate column; a bad cell is a bad file (the site cannot be placed)."""
    import pandas as pd
    text = table.extra[name]
    values = pd.to_numeric(pd.Series(text, dtype=object), errors="coerce").to_numpy(dtype=float)
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        row = int(bad[0])
        raise LaminaInputError(f"{name} = {text[row]!r} is not a finite number",
                               f"{label}:{int(table.lines[row])}: column {table.columns[name] + 1} ({name})",
                               f"the site's {name} in mm")
    return values


def _group_rows(table, label: str, has_wafer: bool):
    """Rows grouped by (wafer, site) in order of first appearance: (keys, rows per site, x, y)."""
    sites = table.extra["site"]
    empty = np.flatnonzero(sites == "")
    if empty.size:
        raise LaminaInputError("empty site label", f"{label}:{int(table.lines[empty[0]])}: column "
                               f"{table.columns['site'] + 1} (site)", "a site label on every row")
    wafers = table.extra[WAFER_COLUMN] if has_wafer else np.full(sites.shape, DEFAULT_WAFER, dtype=object)
    if has_wafer and (wafers == "").any():
        row = int(np.flatnonzero(wafers == "")[0])
        raise LaminaInputError("empty wafer label", f"{label}:{int(table.lines[row])}: column "
                               f"{table.columns[WAFER_COLUMN] + 1} (wafer)", "a wafer label on every row")
    x_mm = _site_coordinates(table, "x_mm", label)
    y_mm = _site_coordinates(table, "y_mm", label)
    keys = np.char.add(np.char.add(wafers.astype(str), "\x1f"), sites.astype(str))
    unique, first, inverse = np.unique(keys, return_index=True, return_inverse=True)
    order = np.argsort(first)  # file order of first appearance
    groups = [np.flatnonzero(inverse == k) for k in order]
    for rows in groups:
        moved = np.flatnonzero((np.abs(x_mm[rows] - x_mm[rows[0]]) > 1e-6) | (np.abs(y_mm[rows] - y_mm[rows[0]]) > 1e-6))
        if moved.size:
            row = int(rows[moved[0]])
            raise LaminaInputError(
                f"site '{sites[row]}' is at ({x_mm[row]:g}, {y_mm[row]:g}) mm here but at "
                f"({x_mm[rows[0]]:g}, {y_mm[rows[0]]:g}) mm on line {int(table.lines[rows[0]])}",
                f"{label}:{int(table.lines[row])}: columns x_mm, y_mm", "one position per site")
    firsts = [int(rows[0]) for rows in groups]
    return ([str(sites[i]) for i in firsts], [str(wafers[i]) for i in firsts], groups,
            x_mm[firsts], y_mm[firsts])


class _SiteGrid:
    """One site's measurement on its own (angle, wavelength) grid: numpy only, cheap to make by the hundred."""

    __slots__ = ("angle", "wavelength", "grids", "key")

    def __init__(self, angle, wavelength, grids: dict):
        self.angle = np.asarray(angle, dtype=float)
        self.wavelength = np.asarray(wavelength, dtype=float)
        self.grids = grids
        # what must agree between sites: angles, wavelengths, quantities and the measured pattern
        names = tuple(sorted(grids))
        self.key = (self.angle.tobytes(), self.wavelength.tobytes(), names,
                    tuple(np.isfinite(grids[name]).tobytes() for name in names))

    @classmethod
    def of_dataset(cls, data: xr.Dataset) -> "_SiteGrid":
        return cls(data["angle"].values, data["wavelength"].values,
                   {str(name): np.asarray(data[name].values, dtype=float) for name in data.data_vars})


def _site_grid(table, rows: np.ndarray, site: str):
    """One site's rows on its grid (the reader's grid_rows), or the reason the site cannot be read."""
    from ..data.readers import grid_rows
    bad = [int(r) for r in rows if int(r) in table.problems]
    if bad:
        return None, f"site '{site}': {table.problems[bad[0]]}"
    try:
        return _SiteGrid(*grid_rows(table, rows)), ""
    except LaminaInputError as exc:
        return None, f"site '{site}': {exc}"


def _read_map_csv(path: Path) -> xr.Dataset:
    """CSV map via the measurement reader's steps (read_csv_text, parse_table, grid_rows, table_to_dataset)."""
    from ..data.readers import parse_table, read_csv_text, table_to_dataset
    csv_text = read_csv_text(path)
    label = str(path)
    for name in SITE_COLUMNS:
        if name not in csv_text.header:
            raise LaminaInputError(f"missing column '{name}'", f"{label}:{csv_text.header_line}",
                                   "columns site, x_mm, y_mm (and optional wafer) plus measurement columns")
    has_wafer = WAFER_COLUMN in csv_text.header
    extra = SITE_COLUMNS + ((WAFER_COLUMN,) if has_wafer else ())
    # collect=True: a bad cell marks its row instead of stopping the file
    table = parse_table(csv_text, extra_columns=extra, collect=True)
    labels, wafers, groups, x_mm, y_mm = _group_rows(table, label, has_wafer)
    parsed, problems = [], []
    for site, rows in zip(labels, groups):
        grid, problem = _site_grid(table, rows, site)
        parsed.append(grid)
        problems.append(problem)
    where = [f"lines {table.lines[rows].min()}-{table.lines[rows].max()}" for rows in groups]
    common = _common_grid(parsed, problems, labels, where, label)
    # one reader-made Dataset of a good site: coordinates, units and file metadata as read_data gives them
    template = table_to_dataset(table, groups[common])
    return _stack_sites(template, parsed, problems, labels, wafers, x_mm, y_mm, has_wafer)


def _common_grid(parsed: list, problems: list, labels, where, label) -> int:
    """Index of a site on the grid most sites share; sites on another grid become unreadable (in place)."""
    counts: dict[tuple, int] = {}
    for grid in parsed:
        if grid is not None:
            counts[grid.key] = counts.get(grid.key, 0) + 1
    if not counts:
        raise LaminaInputError(f"no site can be read (first: {problems[0]})", label,
                               "at least one site with valid measurements")
    common = max(counts, key=counts.get)
    first = next(i for i, grid in enumerate(parsed) if grid is not None and grid.key == common)
    shape = (parsed[first].angle.size, parsed[first].wavelength.size)
    for i, grid in enumerate(parsed):
        if grid is not None and grid.key != common:
            parsed[i] = None
            problems[i] = (f"site '{labels[i]}' ({where[i]}): its angles, wavelengths or measured points differ "
                           f"from the rest of the map ({grid.angle.size} angles x {grid.wavelength.size} "
                           f"wavelengths instead of {shape[0]} x {shape[1]}, or points missing)")
    return first


def _stack_sites(template: xr.Dataset, parsed, problems, labels, wafers, x_mm, y_mm, has_wafer) -> xr.Dataset:
    """Stack the site grids along a new `site` dim (numpy, not xr.concat: maps are long); unreadable = NaN."""
    import xarray as xr
    data_vars = {}
    for name in template.data_vars:
        blank = np.full(template[name].shape, np.nan)
        values = np.stack([grid.grids[name] if grid is not None else blank for grid in parsed])
        data_vars[name] = (("site",) + template[name].dims, values, template[name].attrs)
    stacked = xr.Dataset(data_vars, coords={
        "site": ("site", np.asarray(labels, dtype=str)),
        "angle": template["angle"],
        "wavelength": template["wavelength"],
        "x_mm": ("site", np.asarray(x_mm, dtype=float), {"units": "mm"}),
        "y_mm": ("site", np.asarray(y_mm, dtype=float), {"units": "mm"}),
        "wafer": ("site", np.asarray(wafers, dtype=str)),
    })
    stacked["site_problem"] = ("site", np.asarray(problems, dtype=object).astype(str))
    stacked.attrs.update(template.attrs)
    stacked.attrs["wafer_column"] = int(bool(has_wafer))
    return stacked


def _read_map_netcdf(path: Path) -> xr.Dataset:
    """NetCDF map; each site is checked like a measurement file (the reader's checks, site by site)."""
    from ..data.readers import _check_netcdf, open_netcdf
    label = str(path)
    dataset = open_netcdf(path)
    for dim in ("site", "angle", "wavelength"):
        if dim not in dataset.dims:
            raise LaminaInputError(f"missing dimension '{dim}'", label, "dims site, angle, wavelength")
    for name in ("x_mm", "y_mm"):
        if name not in dataset.variables or dataset[name].dims != ("site",):
            raise LaminaInputError(f"missing coordinate '{name}' along site", label,
                                   "coordinates x_mm, y_mm along site")
        bad = np.flatnonzero(~np.isfinite(np.asarray(dataset[name].values, dtype=float)))
        if bad.size:
            raise LaminaInputError(f"{name} is not finite at site index {bad[0]}", f"{label}: {name}",
                                   "finite coordinates in mm")
    has_wafer = WAFER_COLUMN in dataset.variables
    n_sites = dataset.sizes["site"]
    labels = ([str(v) for v in dataset["site"].values] if "site" in dataset.variables
              else [str(i + 1) for i in range(n_sites)])
    wafers = [str(v) for v in dataset[WAFER_COLUMN].values] if has_wafer else [DEFAULT_WAFER] * n_sites
    measurements = dataset.drop_vars([name for name in ("site", "x_mm", "y_mm", WAFER_COLUMN)
                                      if name in dataset.variables])
    checked, problems = [], []
    for i, site in enumerate(labels):
        try:
            checked.append(_check_netcdf(measurements.isel(site=i), f"{label}: site '{site}'"))
            problems.append("")
        except LaminaInputError as exc:
            checked.append(None)
            problems.append(str(exc))
    parsed = [_SiteGrid.of_dataset(data) if data is not None else None for data in checked]
    where = [f"site index {i}" for i in range(n_sites)]
    template = checked[_common_grid(parsed, problems, labels, where, label)]
    return _stack_sites(template, parsed, problems, labels, wafers, dataset["x_mm"].values.astype(float),
                        dataset["y_mm"].values.astype(float), has_wafer)


def check_on_wafer(dataset: xr.Dataset, geometry: WaferGeometry) -> None:
    """Bad input if a site lies off the wafer (its coordinates cannot be right)."""
    off = np.flatnonzero(~geometry.on_wafer(dataset["x_mm"].values, dataset["y_mm"].values))
    if off.size:
        i = int(off[0])
        raise LaminaInputError(
            f"site '{dataset['site'].values[i]}' at ({dataset['x_mm'].values[i]:g}, {dataset['y_mm'].values[i]:g}) mm "
            f"lies off a {geometry.diameter_mm:g} mm wafer", dataset.attrs.get("source_file", "map"),
            "sites within the wafer radius (check the spec's diameter_mm)")


def site_data(dataset: xr.Dataset, index: int) -> xr.Dataset:
    """The measurement of one site as a Dataset (angle, wavelength), as `lamina.read_data` gives it."""
    site = dataset.isel(site=index)
    return site.drop_vars([name for name in ("site", "x_mm", "y_mm", "wafer", "site_problem")
                           if name in site.variables])


# ----------------------------------------------------------------------------
# fitting on dask
# ----------------------------------------------------------------------------

#: site_fit(stack, data, global_search) -> object with .to_dict() and .stack
SiteFit = Callable[..., object]


def default_site_fit(stack, data, global_search=False):
    """The shipped per-site fit: `lamina.fit`."""
    from .. import fit as fit_package
    return fit_package.fit(stack, data, global_search=global_search)


def _outcome_from_result(result, index: int, global_search: bool) -> dict:
    summary = result.to_dict()
    stats = summary.get("statistics", {})
    parameters = summary.get("parameters", {})
    outcome = {
        "index": index,
        "status": "fitted",
        "reduced_chi2": float(stats.get("reduced_chi2", math.nan)),
        "values": {name: float(entry.get("value", math.nan)) for name, entry in parameters.items()},
        "stderr": {name: _float_or_nan(entry.get("stderr")) for name, entry in parameters.items()},
        "warnings": list(summary.get("warnings", [])),
        "global_search": bool(global_search),
        "reason": "",
    }
    if not summary.get("converged", True):
        details = [str(summary["message"])] if summary.get("message") else []
        details += outcome["warnings"]
        outcome["status"] = "failed"
        outcome["reason"] = "fit did not converge" + (f" ({'; '.join(details)})" if details else "")
    elif not math.isfinite(outcome["reduced_chi2"]):
        outcome["status"] = "failed"
        outcome["reason"] = "fit gave a non-finite reduced chi-square"
    return outcome


def _float_or_nan(value) -> float:
    try:
        return float(value) if value is not None else math.nan
    except (TypeError, ValueError):
        return math.nan


def _failed(index: int, reason: str) -> dict:
    return {"index": index, "status": "failed", "reduced_chi2": math.nan, "values": {}, "stderr": {},
            "warnings": [], "global_search": False, "reason": reason}


def fit_site(stack, data, index: int, site_fit: SiteFit, global_search: bool) -> tuple[dict, object]:
    """Fit one site; (outcome, fitted stack or None).  Never raises: a failure is an outcome."""
    try:
        result = site_fit(stack, data, global_search=global_search)
        return _outcome_from_result(result, index, global_search), getattr(result, "stack", None)
    except Exception as exc:  # one bad site must not stop the map; the reason is kept
        text = str(exc) or type(exc).__name__
        return _failed(index, f"fit failed: {text}"), None


def fit_chunk(stack, sites: list, indices: list[int], site_fit: SiteFit,
              global_search: bool = False) -> list[dict]:
    """Worker task: fit the sites of one chunk (their measurements, as `site_data` gives them) from one start."""
    with _single_thread_blas():
        return [fit_site(stack, data, index, site_fit, global_search)[0] for data, index in zip(sites, indices)]


def fit_chunk_seeded(reference: tuple, model, sites: list, indices: list[int], site_fit: SiteFit) -> list[dict]:
    """Worker task: a chunk started from its wafer's reference fit (the model's own start if that failed).

    `reference` is the result of the `fit_reference` task; dask hands it over as soon as that task
    ends, so the chunks need no round trip through the client.
    """
    seed = reference[1] if reference is not None and reference[1] is not None else model
    return fit_chunk(seed, sites, indices, site_fit)


def fit_reference(stack, data: xr.Dataset, index: int, site_fit: SiteFit):
    """Worker task: the reference site with the global search; (outcome, seed stack or None)."""
    with _single_thread_blas():
        outcome, fitted = fit_site(stack, data, index, site_fit, True)
    return outcome, (fitted if outcome["status"] == "fitted" and fitted is not None else None)


@contextlib.contextmanager
def _single_thread_blas():
    """Keep BLAS to one thread inside a task when threadpoolctl is present (env vars do the rest)."""
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - optional
        yield
        return
    with threadpool_limits(1):
        yield


class MapCluster:
    """A dask.distributed Client: to `scheduler` if given, else on a new LocalCluster it owns.

    The local cluster has `workers` single-threaded worker processes (default: one
    per core) with OMP/BLAS threads set to 1; its HTTP port is any free one (":0"),
    so that several maps can run side by side.  `close()` stops what was started;
    `close_in_background()` does so in a thread (stopping worker processes takes a
    second or two that the caller can spend writing its outputs).
    """

    def __init__(self, workers: int | None = None, scheduler: str | None = None, connect_timeout: str = "10s"):
        import threading
        from distributed import Client, LocalCluster
        self.cluster = None
        self._closing, self._closed = threading.Lock(), False
        if scheduler:
            try:
                self.client = Client(scheduler, timeout=connect_timeout)
            except (OSError, TimeoutError, ValueError, TypeError) as exc:
                raise LaminaInputError(f"cannot reach the dask scheduler: {exc}", f"--scheduler {scheduler}",
                                       "the address of a running dask.distributed scheduler, "
                                       "e.g. tcp://host:8786") from None
            return
        previous = {name: os.environ.get(name) for name in WORKER_ENV}
        os.environ.update(WORKER_ENV)  # spawned workers inherit these before numpy loads
        try:
            with _fork_from_a_warm_server():
                self.cluster = LocalCluster(n_workers=workers or available_cores(), threads_per_worker=1,
                                            processes=True, dashboard_address=":0", silence_logs=logging.ERROR,
                                            env=dict(WORKER_ENV))
            self.client = Client(self.cluster)
        except BaseException:
            if self.cluster is not None:
                self.cluster.close()
            raise
        finally:
            for name, value in previous.items():
                if value is None:
                    os.environ.pop(name, None)
                else:
                    os.environ[name] = value

    def close(self) -> None:
        """Stop what was started; a second call waits for the first (e.g. one in the background)."""
        with self._closing:
            if self._closed:
                return
            self._closed = True
            self.client.close()
            if self.cluster is not None:
                self.cluster.close()

    def close_in_background(self):
        import threading
        closer = threading.Thread(target=self.close, name="lamina-map-cluster-close", daemon=True)
        closer.start()
        return closer

    def __enter__(self) -> "MapCluster":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


#: modules every worker needs; imported once in the fork server instead of once per worker
#: ("distributed" first: its own preload, which it would otherwise set on first use).  Only what
#: a site fit needs: this import is the longest step before the first site can be fitted.
#: (dask.array is left out: workers get each site as its own small Dataset and never index
#: xarray objects, which is what makes xarray import it.)
WORKER_PRELOAD = ("distributed", "lmfit", "xarray", "lamina.fit.engine", "lamina.optics.solver", "lamina.qa.maps")


_FORKSERVER_LOCK = __import__("threading").Lock()
_forkserver_ready = False


def _configure_forkserver(extra_preload: Iterable[str] = ()) -> bool:
    """Start the fork server with lamina's preload list (once per process); False where forkserver does not exist.

    Started here, before dask is even imported in this process, so that the server's imports
    (some seconds) overlap everything the caller does meanwhile; distributed's own later
    request for a preload list then finds the server running and changes nothing.
    `extra_preload`: modules the caller's own tasks need too (only the first call's count).
    """
    global _forkserver_ready
    import multiprocessing
    if "forkserver" not in multiprocessing.get_all_start_methods():
        return False
    with _FORKSERVER_LOCK:
        if not _forkserver_ready:
            from multiprocessing import forkserver
            preload = list(dict.fromkeys(WORKER_PRELOAD + tuple(extra_preload)))
            multiprocessing.get_context("forkserver").set_forkserver_preload(preload)
            forkserver.ensure_running()
            _forkserver_ready = True
    return True


def prepare_local_workers(extra_preload: Iterable[str] = ()) -> None:
    """Start the warm fork server in a background thread, ahead of the cluster.

    Its imports (some seconds) then overlap whatever the caller does meanwhile
    (importing dask, reading the model and the map); nothing to undo if the caller stops early.
    `extra_preload`: modules that the caller's own tasks on the workers need besides the fits.
    """
    import threading

    def start():
        try:
            _configure_forkserver(extra_preload)
        except Exception:  # the cluster start reports any real problem
            pass
    threading.Thread(target=start, name="lamina-forkserver", daemon=True).start()


@contextlib.contextmanager
def _fork_from_a_warm_server():
    """Start local workers by forking a server process that has imported the fitting stack.

    A spawned worker imports distributed, scipy, lmfit and lamina afresh: some 3 CPU
    seconds per worker, which on a short map costs as much as the fitting itself.
    With the 'forkserver' start method those imports happen once, in the server, and
    each worker is a cheap fork of it.  Where forkserver is not available (Windows) the
    default 'spawn' stays.
    """
    if not _configure_forkserver():
        yield
        return
    import dask
    with dask.config.set({"distributed.worker.multiprocessing-method": "forkserver"}):
        yield


@contextlib.contextmanager
def dask_client(workers: int | None = None, scheduler: str | None = None, connect_timeout: str = "10s"):
    """``with dask_client(...) as client``: a `MapCluster`'s client, closed at the end of the block."""
    with MapCluster(workers, scheduler, connect_timeout) as session:
        yield session.client


def _worker_addresses(client) -> list[str]:
    try:
        return list(client.scheduler_info(n_workers=-1)["workers"])
    except TypeError:  # older distributed: no n_workers argument
        return list(client.scheduler_info()["workers"])


def _warm_up() -> None:
    """Pay the imports once per worker, in parallel: lmfit alone (it pulls in scipy.stats) costs
    seconds, and the fit imports it lazily on the first site."""
    import lmfit  # noqa: F401
    import lamina.fit.engine  # noqa: F401
    import lamina.optics.solver  # noqa: F401


def available_cores() -> int:
    """Cores this process may run on (respects CPU affinity, e.g. in containers and batch jobs)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _chunks(indices: list[int], size: int) -> list[list[int]]:
    return [indices[i:i + size] for i in range(0, len(indices), size)]


def choose_chunk_size(n_sites: int, n_workers: int) -> int:
    """About eight chunks per worker and at most 25 sites per chunk.

    Small enough that the workers finish within about half a chunk of each other (a
    25-site chunk of a simple model is a few tenths of a second), large enough that
    dask's per-task cost (about a millisecond) stays far below the fitting time.
    """
    return int(max(1, min(25, math.ceil(n_sites / max(1, 8 * n_workers)))))


def _workers_of(client) -> int:
    return max(1, len(_worker_addresses(client)))


def fit_map(stack, dataset: xr.Dataset, client, site_fit: SiteFit | None = None,
            chunk_size: int | None = None, progress: Callable[[int], None] | None = None) -> list[dict]:
    """Fit every site of `dataset` on the dask `client`; one outcome dict per site, in site order.

    Outcome keys: index, status ("fitted" or "failed"), reduced_chi2, values,
    stderr (by parameter name), warnings, global_search, reason, reference
    (True for the reference site of its wafer), refit (True when the outlier
    rule sent it through the global search again).
    """
    from distributed import as_completed
    site_fit = site_fit or default_site_fit
    n_sites = dataset.sizes["site"]
    problems = dataset["site_problem"].values
    outcomes: list[dict | None] = [None] * n_sites
    tick = progress or (lambda n: None)
    for i in np.flatnonzero(problems != ""):
        outcomes[int(i)] = _failed(int(i), str(problems[i]))
        tick(1)
    # import the fitting code on every worker now, while the reference site is being read and sent,
    # so that no worker is cold when its first chunk arrives
    warm = [client.submit(_warm_up, pure=False, workers=[address], allow_other_workers=False)
            for address in _worker_addresses(client)]
    # hash=False: a fresh key per map, never one that an earlier map on the same cluster is releasing
    model = client.scatter(stack, broadcast=True, hash=False)

    # 1. reference site of each wafer, global search
    wafers = dataset["wafer"].values
    references: dict[str, int] = {}
    for wafer in dict.fromkeys(wafers):
        usable = (wafers == wafer) & (problems == "")
        if usable.any():
            references[wafer] = reference_site(dataset["x_mm"].values, dataset["y_mm"].values, usable)
    reference_futures = {wafer: client.submit(fit_reference, model, site_data(dataset, i), i, site_fit, pure=False)
                         for wafer, i in references.items()}

    # 2. the other sites in chunks, each seeded from its wafer's reference: the chunk tasks depend on
    #    the reference task, so dask starts them the moment it ends (no round trip through here).
    #    The sites are split here, one small Dataset each: workers never index xarray objects.
    size = chunk_size or choose_chunk_size(n_sites, _workers_of(client))
    futures, chunks_of = {}, {}
    for wafer in dict.fromkeys(wafers):
        todo = [i for i in range(n_sites) if wafers[i] == wafer and outcomes[i] is None
                and references.get(wafer) != i]
        reference = reference_futures.get(wafer)
        chunks_of[wafer] = [(chunk, [site_data(dataset, i) for i in chunk]) for chunk in _chunks(todo, size)]
        for chunk, sites in chunks_of[wafer]:
            futures[client.submit(fit_chunk_seeded, reference, model, sites, chunk, site_fit, pure=False)] = chunk
    for wafer, future in reference_futures.items():
        try:
            outcome, _ = future.result()
        except Exception as exc:  # a lost worker, not a bad site: record it, fit the rest from the model
            outcome = _failed(references[wafer], f"task failed on the cluster: {exc}")
            _resubmit_unseeded(client, futures, chunks_of[wafer], model, site_fit)
        outcome["reference"] = True
        outcomes[outcome["index"]] = outcome
        tick(1)
    _collect(futures, outcomes, tick, as_completed)

    # 3. outliers again with the global search, from the model's own start
    again = outlier_sites(outcomes)
    if again:
        futures = {client.submit(fit_chunk, model, [site_data(dataset, i) for i in chunk], chunk, site_fit, True,
                                 pure=False): chunk
                   for chunk in _chunks(again, size)}
        retried: list[dict | None] = [None] * n_sites
        _collect(futures, retried, lambda n: None, as_completed)
        for i in again:
            better = retried[i]
            if better is not None and better["status"] == "fitted" and \
                    better["reduced_chi2"] < outcomes[i]["reduced_chi2"]:
                outcomes[i] = better
            outcomes[i]["refit"] = True
    del warm  # held until here so that the warm-up tasks are not cancelled early
    for outcome in outcomes:
        outcome.setdefault("reference", False)
        outcome.setdefault("refit", False)
    return outcomes


def _resubmit_unseeded(client, futures: dict, chunks: list, model, site_fit) -> None:
    """Chunks that waited on a reference task the cluster lost: send them again, from the model's start."""
    waiting = {tuple(chunk) for chunk, _ in chunks}
    for future in [f for f, chunk in futures.items() if tuple(chunk) in waiting]:
        del futures[future]
        future.cancel()
    for chunk, sites in chunks:
        futures[client.submit(fit_chunk, model, sites, chunk, site_fit, pure=False)] = chunk


def _collect(futures: dict, outcomes, tick, as_completed) -> None:
    """Outcomes of finished chunk tasks into `outcomes`; a task lost on the cluster fails its sites."""
    for future in as_completed(list(futures)):
        try:
            chunk_outcomes = future.result()
        except Exception as exc:  # e.g. a worker killed mid-task: its sites fail, the map goes on
            chunk_outcomes = [_failed(i, f"task failed on the cluster: {exc}") for i in futures[future]]
        for outcome in chunk_outcomes:
            outcomes[outcome["index"]] = outcome
        tick(len(chunk_outcomes))


def outlier_sites(outcomes: Iterable[dict]) -> list[int]:
    """Fitted sites whose reduced chi2 exceeds both OUTLIER_FACTOR x the median and OUTLIER_FLOOR."""
    fitted = [o for o in outcomes if o is not None and o["status"] == "fitted" and not o.get("reference")]
    if not fitted:
        return []
    median = float(np.median([o["reduced_chi2"] for o in fitted]))
    limit = max(OUTLIER_FACTOR * median, OUTLIER_FLOOR)
    return [o["index"] for o in fitted if o["reduced_chi2"] > limit]


# ----------------------------------------------------------------------------
# results and judgement
# ----------------------------------------------------------------------------

def results_dataset(dataset: xr.Dataset, outcomes: list[dict], parameters: list[str],
                    geometry: WaferGeometry, spec=None, units: dict | None = None) -> xr.Dataset:
    """Per-site results (dim site): status, pass, reduced_chi2, <name>, <name>.stderr, reason."""
    import xarray as xr
    units = units or {}
    x_mm = dataset["x_mm"].values.astype(float)
    y_mm = dataset["y_mm"].values.astype(float)
    status = np.array([o["status"] for o in outcomes], dtype=object).astype(str)
    fitted = status == "fitted"
    in_zone = geometry.in_zone(x_mm, y_mm)
    results = xr.Dataset(coords={
        "site": ("site", dataset["site"].values.astype(str)),
        "x_mm": ("site", x_mm, {"units": "mm"}),
        "y_mm": ("site", y_mm, {"units": "mm"}),
        "wafer": ("site", dataset["wafer"].values.astype(str)),
    })
    results["status"] = ("site", status)
    results["radius_mm"] = ("site", geometry.radius_of(x_mm, y_mm), {"units": "mm"})
    results["in_zone"] = ("site", in_zone.astype(np.int8),
                          {"description": "1 inside the edge exclusion (judged and counted), else 0"})
    results["reduced_chi2"] = ("site", np.array([o["reduced_chi2"] for o in outcomes], dtype=float))
    for name in parameters:
        value = np.array([o["values"].get(name, math.nan) for o in outcomes], dtype=float)
        stderr = np.array([o["stderr"].get(name, math.nan) for o in outcomes], dtype=float)
        value[~fitted] = np.nan
        stderr[~fitted] = np.nan
        results[name] = ("site", value, {"units": units.get(name, "")})
        results[f"{name}.stderr"] = ("site", stderr, {"units": units.get(name, "")})
    verdict = site_verdicts(results, parameters, spec)
    results["pass"] = ("site", verdict, {"description": "1 pass, 0 fail, -1 not judged (no spec, outside the "
                                                        "edge exclusion, or not fitted)"})
    results["reference"] = ("site", np.array([o.get("reference", False) for o in outcomes], dtype=np.int8))
    results["refit"] = ("site", np.array([o.get("refit", False) for o in outcomes], dtype=np.int8))
    results["reason"] = ("site", np.array([o["reason"] for o in outcomes], dtype=object).astype(str))
    results.attrs.update({"diameter_mm": geometry.diameter_mm, "edge_exclusion_mm": geometry.edge_exclusion_mm,
                          "wafer_column": int(dataset.attrs.get("wafer_column", 0))})
    return results


def site_verdicts(results: xr.Dataset, parameters: list[str], spec) -> np.ndarray:
    """Per site: 1 inside every limit, 0 outside one, -1 not judged."""
    n_sites = results.sizes["site"]
    verdict = np.full(n_sites, -1, dtype=np.int8)
    if spec is None:
        return verdict
    judged = (results["status"].values == "fitted") & (results["in_zone"].values == 1)
    inside = np.ones(n_sites, dtype=bool)
    for name, (lower, upper) in spec.limits.items():
        value = results[name].values
        inside &= (value >= lower) & (value <= upper)
    verdict[judged] = inside[judged].astype(np.int8)
    return verdict


def summarize(results: xr.Dataset, parameters: list[str], spec=None) -> dict:
    """Per-wafer statistics over the sites in the zone, spec verdicts and failure counts."""
    wafers = {}
    for wafer in dict.fromkeys(results["wafer"].values.tolist()):
        part = results.isel(site=np.flatnonzero(results["wafer"].values == wafer))
        wafers[wafer] = _summarize_wafer(part, parameters, spec)
    failed = int((results["status"].values == "failed").sum())
    judged = [w["pass"] for w in wafers.values() if w["pass"] is not None]
    return {
        "n_sites": int(results.sizes["site"]),
        "n_fitted": int(results.sizes["site"]) - failed,
        "n_failed": failed,
        "n_wafers": len(wafers),
        "geometry": {"diameter_mm": float(results.attrs["diameter_mm"]),
                     "edge_exclusion_mm": float(results.attrs["edge_exclusion_mm"])},
        "spec": _spec_summary(spec),
        "pass": (all(judged) if judged else None) if spec is not None else None,
        "wafers": wafers,
        "caution": CAUTION,
    }


def _spec_summary(spec):
    if spec is None:
        return None
    return {"path": spec.path,
            "limits": {k: {"lower": lo, "upper": hi} for k, (lo, hi) in spec.limits.items()},
            "uniformity": spec.uniformity}


def _summarize_wafer(part: xr.Dataset, parameters: list[str], spec) -> dict:
    fitted = part["status"].values == "fitted"
    zone = part["in_zone"].values == 1
    use = fitted & zone
    stats = {name: {**map_statistics(part[name].values[use]), "unit": part[name].attrs.get("units", "")}
             for name in parameters}
    failed_in_zone = int((~fitted & zone).sum())
    summary = {
        "n_sites": int(part.sizes["site"]),
        "n_in_zone": int(zone.sum()),
        "n_failed": int((~fitted).sum()),
        "n_failed_in_zone": failed_in_zone,
        "failed_sites": part["site"].values[~fitted].tolist(),
        "parameters": stats,
        "pass": None,
        "reasons": [],
    }
    if spec is not None:
        summary["reasons"] = _wafer_reasons(part, stats, spec, use, failed_in_zone)
        summary["pass"] = not summary["reasons"]
    return summary


def _wafer_reasons(part: xr.Dataset, stats: dict, spec, use: np.ndarray, failed_in_zone: int) -> list[str]:
    reasons = []
    if failed_in_zone:
        reasons.append(f"{failed_in_zone} site(s) inside the edge exclusion could not be fitted")
    if not use.any():
        reasons.append("no fitted site inside the edge exclusion")
    for name, (lower, upper) in spec.limits.items():
        value = part[name].values[use]
        outside = int(((value < lower) | (value > upper)).sum())
        if outside:
            labels = part["site"].values[use][(value < lower) | (value > upper)].tolist()
            reasons.append(f"{name}: {outside} of {int(use.sum())} sites outside [{lower:g}, {upper:g}] "
                           f"(sites {', '.join(labels[:10])}{', ...' if len(labels) > 10 else ''})")
    for name, limits in spec.uniformity.items():
        for key, limit in limits.items():
            stat = "nonuniformity_pct" if key == "max_nonuniformity_pct" else "std_over_mean_pct"
            value = stats[name][stat]
            if not math.isfinite(value) or value > limit:
                reasons.append(f"{name}: {stat} = {value:.3g} % exceeds {limit:g} %")
    return reasons


def wafer_table(summary: dict, parameters: list[str]) -> list[dict]:
    """One row per wafer: counts, verdict and mean/range/nonuniformity of each parameter."""
    rows = []
    for wafer, entry in summary["wafers"].items():
        row = {"wafer": wafer, "n_sites": entry["n_sites"], "n_failed": entry["n_failed"],
               "pass": "" if entry["pass"] is None else str(entry["pass"]).lower()}
        for name in parameters:
            stats = entry["parameters"][name]
            for key in ("mean", "std", "min", "max", "range", "nonuniformity_pct"):
                row[f"{name}.{key}"] = stats[key]
        row["reasons"] = "; ".join(entry["reasons"])
        rows.append(row)
    return rows


def exit_code(summary: dict) -> int:
    """3 when any site failed (wins over 1), 1 when any wafer fails the spec, else 0."""
    if summary["n_failed"]:
        return 3
    if summary["pass"] is False:
        return 1
    return 0
