"""Throughput of `lamina map`: whole command (subprocess, start-up included), 1 and 2 workers.

Maps: 49 and 400 sites of thermal oxide on Si (the sample map's model, library SiO2 and
Si), one angle (70 deg), 50 wavelengths 400-1000 nm, Psi/Delta with typical noise.  The
data are simulated by lamina here and are synthetic.  Prints seconds, sites per second
and the speed-up of 2 workers over 1.

    python benchmarks/map.py                  # both maps, 1 and 2 workers
    python benchmarks/map.py --sites 400 --repeat 5
    python benchmarks/map.py --sites 400 --warm-cluster   # through --scheduler: workers already running
    python benchmarks/map.py --sites --plumbing 2000   # orchestration alone, no fitting
    python benchmarks/map.py --sites --stage 400       # fit_map alone on a warm cluster

The runs alternate (1 worker, 2 workers, 1 worker, ...) so that both see the same load on
a shared machine; the speed-up is given from the fastest runs and as the median of the
pairs.  Goal on a 2-core machine for the 400-site map: 2 workers at least 1.6x faster
than 1, and at least 20 sites/s with 2 workers.  With T(W) = F + S / W, 1.6x needs the
fixed part F under S / 3; the script prints the split F, S it measured.  Other load on
the machine spoils the figures: run it on a quiet machine (it prints the load average).
"""
from __future__ import annotations

import argparse
import contextlib
import math
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "src" / "lamina" / "sample_data" / "maps" / "oxide_map_model.toml"
WAVELENGTH_NM = np.linspace(400.0, 1000.0, 50)


def layout(n_sites: int):
    """The n_sites grid points nearest the centre on a square grid that fills r <= 72 mm."""
    pitch = math.sqrt(math.pi * 72.0 ** 2 / n_sites)
    axis = np.arange(-80.0, 80.0 + 1e-9, pitch)
    x, y = np.meshgrid(axis - axis[np.argmin(np.abs(axis))], axis - axis[np.argmin(np.abs(axis))])
    x, y = x.ravel(), y.ravel()
    order = np.argsort(np.hypot(x, y), kind="stable")[:n_sites]
    return np.round(x[order], 3), np.round(y[order], 3)


def write_map(path: Path, n_sites: int, seed: int = 1) -> Path:
    import lamina
    stack = lamina.load_model(MODEL)
    x_mm, y_mm = layout(n_sites)
    thickness = 100.0 + 2.0 * (np.hypot(x_mm, y_mm) / 70.0) ** 2
    spectra = lamina.simulate(stack, wavelength_nm=WAVELENGTH_NM, angle_deg=[70.0],
                              values={"oxide.thickness_nm": thickness})
    rng = np.random.default_rng(seed)
    psi = spectra["psi"].transpose("batch", "angle", "wavelength").values[:, 0, :]
    delta = spectra["delta"].transpose("batch", "angle", "wavelength").values[:, 0, :]
    psi = psi + rng.normal(0, 0.02, psi.shape)
    delta = np.mod(delta + rng.normal(0, 0.05, delta.shape), 360.0)
    lines = ["# synthetic benchmark map (simulated by lamina; not a measurement)",
             "site,x_mm,y_mm,wavelength_nm,angle_deg,psi_deg,psi_err_deg,delta_deg,delta_err_deg"]
    for i in range(n_sites):
        for w, wavelength in enumerate(WAVELENGTH_NM):
            lines.append(f"{i + 1},{x_mm[i]:g},{y_mm[i]:g},{wavelength:.4f},70,{psi[i, w]:.4f},0.02,"
                         f"{delta[i, w]:.4f},0.05")
    path.write_text("\n".join(lines) + "\n")
    return path


def run(mapfile: Path, workers: int, outdir: Path, scheduler: str | None = None) -> tuple[float, float]:
    """(wall seconds, CPU seconds of the command and the processes it waited for).

    With `scheduler`, the command sends its work to that running cluster (of `workers` workers).
    """
    import resource
    where = ["--scheduler", scheduler] if scheduler else ["--workers", str(workers)]
    command = [sys.executable, "-m", "lamina.cli", "map", str(mapfile), "--model", str(MODEL),
               *where, "--quiet", "-o", str(outdir)]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True)
    seconds = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode not in (0, 1):
        raise SystemExit(f"lamina map failed ({done.returncode}):\n{done.stderr}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return seconds, cpu


class _NoFit:
    """Stands in for a fit result: what the orchestration needs, nothing computed."""

    def __init__(self, stack):
        self.stack = stack

    def to_dict(self):
        return {"converged": True, "statistics": {"reduced_chi2": 1.0},
                "parameters": {"oxide.thickness_nm": {"value": 100.0, "stderr": 0.01}}, "warnings": []}


def no_fit(stack, data, global_search=False):
    return _NoFit(stack)


def plumbing(n_sites: int, workers: int) -> None:
    """Sites per second of the dask orchestration alone (read map, scatter, chunks, collect): no fitting."""
    import lamina
    from lamina.qa import maps
    with tempfile.TemporaryDirectory() as tmp:
        dataset = maps.read_map(write_map(Path(tmp) / "plumbing.csv", n_sites))
    stack = lamina.load_model(MODEL)
    with maps.dask_client(workers=workers) as client:
        maps.fit_map(stack, dataset.isel(site=slice(0, 2 * workers)), client, site_fit=no_fit)  # warm
        start = time.perf_counter()
        maps.fit_map(stack, dataset, client, site_fit=no_fit)
        seconds = time.perf_counter() - start
    print(f"orchestration only (no fitting), {n_sites} sites, {workers} worker(s): {seconds:.2f} s, "
          f"{n_sites / seconds:.0f} sites/s")


def fitting_stage(n_sites: int, workers: int, repeat: int) -> None:
    """Sites per second of fit_map alone (real fits) on a started, warm local cluster."""
    import lamina
    from lamina.qa import maps
    with tempfile.TemporaryDirectory() as tmp:
        dataset = maps.read_map(write_map(Path(tmp) / "stage.csv", n_sites))
    stack = lamina.load_model(MODEL)
    with maps.dask_client(workers=workers) as client:
        maps.fit_map(stack, dataset.isel(site=slice(0, 2 * workers)), client)  # warm the workers
        times = []
        for _ in range(repeat):
            start = time.perf_counter()
            maps.fit_map(stack, dataset, client)
            times.append(time.perf_counter() - start)
    best = min(times)
    print(f"fitting stage only (warm cluster), {n_sites} sites, {workers} worker(s): {best:.2f} s, "
          f"{n_sites / best:.0f} sites/s (load {os.getloadavg()[0]:.1f})", flush=True)


def _split(n_sites: int, one: float, two: float) -> None:
    """Fixed part F and fitting part S of T(W) = F + S / W, from the 1- and 2-worker times (Amdahl).

    A rough split (it assumes the second worker had a free core): it says how much of a
    command does not shrink with more workers, and so the best speed-up one can expect.
    """
    fitting = 2.0 * (one - two)
    fixed = one - fitting
    if fitting <= 0:
        print(f"{n_sites:4d} sites: no measurable gain from a second worker")
        return
    print(f"{n_sites:4d} sites: about {fixed:.1f} s fixed + {fitting:.1f} s of fitting on one worker "
          f"({1000 * fitting / n_sites:.0f} ms per site); a 1.6x speed-up of 2 workers would need a "
          f"fixed part under {fitting / 3:.1f} s")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sites", type=int, nargs="*", default=[49, 400])
    parser.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--repeat", type=int, default=3, help="runs per case (alternating); the fastest counts")
    parser.add_argument("--warm-cluster", action="store_true",
                        help="start a 1- and a 2-worker cluster first and run the command with --scheduler: "
                             "the whole command minus the start-up of the workers (a long-lived cluster)")
    parser.add_argument("--plumbing", type=int, metavar="SITES", default=0,
                        help="also time the dask orchestration alone on a map of SITES sites (no fitting)")
    parser.add_argument("--stage", type=int, metavar="SITES", default=0,
                        help="also time fit_map alone (real fits, warm cluster) on a map of SITES sites")
    args = parser.parse_args(argv)
    print(f"cores: {os.cpu_count()}, load average before: {os.getloadavg()[0]:.2f}")
    if args.stage:
        for workers in args.workers:
            fitting_stage(args.stage, workers, max(1, args.repeat))
    if args.plumbing:
        for workers in args.workers:
            plumbing(args.plumbing, workers)
    with tempfile.TemporaryDirectory() as tmp, contextlib.ExitStack() as clusters:
        folder = Path(tmp)
        schedulers = {}
        if args.warm_cluster:
            from lamina.qa import maps
            for workers in args.workers:  # started once, used by every run: start-up of the workers excluded
                schedulers[workers] = clusters.enter_context(maps.MapCluster(workers)).cluster.scheduler_address
        for n_sites in args.sites:
            mapfile = write_map(folder / f"map{n_sites}.csv", n_sites)
            times = {workers: [] for workers in args.workers}
            cpu = {workers: [] for workers in args.workers}
            for k in range(args.repeat):  # alternate the worker counts: both see the same load
                for workers in args.workers:
                    wall, used = run(mapfile, workers, folder / f"out{n_sites}_{workers}_{k}", schedulers.get(workers))
                    times[workers].append(wall)
                    cpu[workers].append(used)
            best = {workers: min(t) for workers, t in times.items()}
            mode = " through --scheduler (warm workers)" if args.warm_cluster else ""
            for workers in args.workers:
                print(f"{n_sites:4d} sites, {workers} worker(s){mode}: {best[workers]:6.2f} s  "
                      f"{n_sites / best[workers]:6.1f} sites/s  CPU {min(cpu[workers]):6.2f} s  "
                      f"(runs: {', '.join(f'{t:.2f}' for t in times[workers])}; load {os.getloadavg()[0]:.1f})",
                      flush=True)
            if 1 in best and len(best) > 1:
                for workers, seconds in best.items():
                    if workers != 1:
                        pairs = [one / other for one, other in zip(times[1], times[workers])]
                        print(f"{n_sites:4d} sites: speed-up {workers} workers over 1: {best[1] / seconds:.2f}x "
                              f"(fastest runs); median of {len(pairs)} pairs {statistics.median(pairs):.2f}x "
                              f"(pairs: {', '.join(f'{r:.2f}' for r in pairs)})")
                if 2 in best:
                    _split(n_sites, best[1], best[2])
    print(f"load average after: {os.getloadavg()[0]:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
