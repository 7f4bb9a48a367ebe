"""Fit speed: oxide on Si, 3 angles x 141 wavelengths, thickness free.

Data (invented for the benchmark, Larkspur Optics pilot-line style): Psi/Delta
of SiO2 (library, Malitson 1965) on Si (library, tabulated) at 65/70/75 deg,
300-1000 nm in 5 nm steps, computed by lamina with Gaussian noise of 0.02 deg
(Psi) and 0.05 deg (Delta).  Each repetition starts from a different thickness
(85-115 nm around the true 102.3 nm).

Reports the median wall time per fit and the model evaluations per fit in
"full-simulate equivalents" (one parameter set on the whole grid; a batch of B
counts B).  Goals: median < 100 ms, < 60 evaluations.  Also times the global
search (1.2 um oxide from a 1.0 um start) and a point-by-point inversion.

Run: python benchmarks/fit.py [--repeat N]
"""
from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402


def make_case(true_nm: float, start_nm: float, upper_nm: float = 500.0):
    import lamina
    from lamina.materials import get
    from lamina.parameters import Param
    from lamina.stack import Layer, Stack

    wl = np.arange(300.0, 1000.0 + 1e-9, 5.0)
    truth = Stack([Layer("oxide", get("SiO2"), Param(true_nm, unit="nm"))], get("Si"))
    ds = lamina.simulate(truth, wavelength_nm=wl, angle_deg=np.array([65.0, 70.0, 75.0]))
    rng = np.random.default_rng(1)
    data = ds[["psi", "delta"]].copy()
    data["psi"] = ds["psi"] + rng.normal(0, 0.02, ds["psi"].shape)
    data["delta"] = np.mod(ds["delta"] + rng.normal(0, 0.05, ds["delta"].shape), 360.0)
    data["psi_err"] = ds["psi"] * 0 + 0.02
    data["delta_err"] = ds["delta"] * 0 + 0.05
    start = Stack([Layer("oxide", get("SiO2"), Param(start_nm, 0.0, upper_nm, vary=True, unit="nm"))], get("Si"))
    return start, data


def bench_local(repeat: int) -> None:
    import lamina
    times, evaluations = [], []
    starts = np.linspace(85.0, 115.0, repeat)
    cases = [make_case(102.3, s) for s in starts]
    lamina.fit(*cases[0])  # warm-up: imports, caches
    for stack, data in cases:
        t0 = time.perf_counter()
        result = lamina.fit(stack, data)
        times.append(time.perf_counter() - t0)
        evaluations.append(result.n_evaluations)
        assert result.success and abs(result.value("oxide.thickness_nm") - 102.3) < 0.05
    print(f"local fit, 3 angles x 141 wavelengths, thickness free ({repeat} fits):")
    print(f"  median time per fit      {1e3 * np.median(times):8.1f} ms   (goal < 100 ms)")
    print(f"  model evaluations / fit  {np.median(evaluations):8.0f}      (goal < 60; range "
          f"{min(evaluations)}-{max(evaluations)})")


def bench_global() -> None:
    import lamina
    stack, data = make_case(1200.0, 1000.0, 2000.0)
    t0 = time.perf_counter()
    result = lamina.fit(stack, data, global_search=True)
    elapsed = time.perf_counter() - t0
    print("global search, 1.2 um oxide from a 1.0 um start (bounds 0-2000 nm):")
    print(f"  time {elapsed:.2f} s, {result.n_evaluations} model evaluations, found "
          f"{result.value('oxide.thickness_nm'):.2f} nm")


def bench_invert() -> None:
    import lamina
    from lamina.fit.invert import invert
    stack, data = make_case(102.3, 102.3)
    fixed = stack.with_params({"oxide.thickness_nm": lamina.Param(102.3, unit="nm")})
    t0 = time.perf_counter()
    result = invert(fixed, data, "oxide")
    elapsed = time.perf_counter() - t0
    print(f"point-by-point inversion of n, k at 141 wavelengths x 3 angles: {1e3 * elapsed:.0f} ms "
          f"({int(result.converged.sum())}/{result.converged.size} converged)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=21)
    args = parser.parse_args()
    bench_local(args.repeat)
    bench_global()
    bench_invert()


if __name__ == "__main__":
    main()
