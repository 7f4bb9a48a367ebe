"""Forward-solver speed: lamina.optics.solve and lamina.simulate against the tmm package.

Stack (demo numbers, invented for the benchmark): ambient air / Cauchy oxide-like
film 105 nm / single-oscillator Lorentz film 42 nm / silicon from the material
library (tabulated).  Psi/Delta at 3 angles x 701 wavelengths (300-1000 nm).

tmm loops in Python (one call per wavelength, angle and polarization), so it is
timed on a subset of points and scaled to the full grid; the script says so.
Wall-clock figures are best-of-N; on a machine shared with other jobs the
medians (and the CPU time per call) are the more honest numbers.

Run: python benchmarks/forward.py [--repeat N]
"""
from __future__ import annotations

import argparse
import time

import numpy as np


def build_stack():
    from lamina import materials
    from lamina.dispersion.cauchy import Cauchy
    from lamina.dispersion.lorentz import Lorentz
    from lamina.parameters import Param
    from lamina.stack import Layer, Stack

    oxide = Cauchy(A=1.452, B_um2=0.0036)
    absorber = Lorentz(eps_inf=2.1, oscillators=[{"amplitude": 1.6, "center_ev": 4.6, "broadening_ev": 0.9}])
    return Stack([Layer("oxide", oxide, Param(105.0, vary=True)),
                  Layer("absorber", absorber, Param(42.0, vary=True))],
                 materials.get("Si"))


def best_of(func, repeat, clock=time.perf_counter):
    """Best and median time of `repeat` calls (wall clock by default)."""
    times = []
    for _ in range(repeat):
        start = clock()
        func()
        times.append(clock() - start)
    return min(times), float(np.median(times))


def cpu_per_call(func, calls):
    """Process CPU time per call over `calls` calls: steadier than wall time on a shared machine."""
    start = time.process_time()
    for _ in range(calls):
        func()
    return (time.process_time() - start) / calls


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=200, help="timed repetitions of the solver")
    parser.add_argument("--tmm-points", type=int, default=120, help="grid points timed with tmm")
    args = parser.parse_args()

    import tmm
    import lamina
    from lamina.optics import delta_from_tmm, solve

    stack = build_stack()
    wavelength = np.linspace(300.0, 1000.0, 701)
    angles = np.array([65.0, 70.0, 75.0])
    inputs = stack.optical_inputs(wavelength)
    n_media, thickness, coherent = inputs.n_media, inputs.thickness_nm, inputs.coherent
    points = angles.size * wavelength.size

    solve(n_media, thickness, coherent, wavelength, angles)  # warm-up
    best, median = best_of(lambda: solve(n_media, thickness, coherent, wavelength, angles), args.repeat)
    cpu = cpu_per_call(lambda: solve(n_media, thickness, coherent, wavelength, angles), args.repeat)
    sim_best, sim_median = best_of(lambda: lamina.simulate(stack, wavelength_nm=wavelength, angle_deg=angles),
                                   max(args.repeat // 4, 5))
    disp_best, _ = best_of(lambda: stack.optical_inputs(wavelength), args.repeat)

    def psi_delta_from_stack():
        # what a fit needs per evaluation: dispersion of every medium, then Psi and Delta only
        inputs = stack.optical_inputs(wavelength)
        return solve(inputs.n_media, inputs.thickness_nm, inputs.coherent, wavelength, angles,
                     quantities=("psi", "delta"))

    full_best, full_median = best_of(psi_delta_from_stack, args.repeat)
    batch = 64
    values = {"oxide.thickness_nm": np.linspace(95, 115, batch)}
    batch_inputs = stack.optical_inputs(wavelength, values)
    batch_best, _ = best_of(lambda: solve(batch_inputs.n_media, batch_inputs.thickness_nm, batch_inputs.coherent,
                                          wavelength, angles), max(args.repeat // 20, 3))

    # tmm on a subset of the grid, scaled to the full grid
    rng = np.random.default_rng(0)
    subset = rng.choice(points, size=min(args.tmm_points, points), replace=False)
    full = solve(n_media, thickness, coherent, wavelength, angles)
    n_table = np.array([np.broadcast_to(n, wavelength.shape) for n in n_media])
    d_list = [np.inf] + list(thickness) + [np.inf]
    worst = 0.0
    tmm_passes = []
    for _ in range(3):  # best of three passes, as fair to tmm as best-of-N is to solve
        start = time.perf_counter()
        for flat in subset:
            a, w = divmod(int(flat), wavelength.size)
            ell = tmm.ellips(list(n_table[:, w]), d_list, np.radians(angles[a]), wavelength[w])
            worst = max(worst, abs(np.degrees(ell["psi"]) - full["psi"][a, w]),
                        abs((delta_from_tmm(ell["Delta"]) - full["delta"][a, w] + 180) % 360 - 180))
        tmm_passes.append(time.perf_counter() - start)
    tmm_time = min(tmm_passes) / subset.size * points

    print(f"stack: air / Cauchy 105 nm / Lorentz 42 nm / Si (table); {angles.size} angles x "
          f"{wavelength.size} wavelengths = {points} points")
    print(f"lamina solve (Psi/Delta, R/T, Mueller, <eps>): best {best * 1e3:.3f} ms, median {median * 1e3:.3f} ms")
    print(f"  per point: {best / points * 1e9:.0f} ns; CPU time per call (mean of {args.repeat}): "
          f"{cpu * 1e3:.3f} ms")
    print(f"dispersion evaluation (stack.optical_inputs): best {disp_best * 1e3:.3f} ms")
    print(f"full evaluation, dispersion + Psi/Delta only (solve quantities=psi,delta): best "
          f"{full_best * 1e3:.3f} ms, median {full_median * 1e3:.3f} ms (goal < 1 ms)")
    print(f"lamina.simulate (dispersion + solve + Dataset): best {sim_best * 1e3:.3f} ms, "
          f"median {sim_median * 1e3:.3f} ms")
    print(f"batched solve, {batch} parameter sets: best {batch_best * 1e3:.2f} ms "
          f"({batch_best / batch * 1e3:.3f} ms per set)")
    print(f"tmm.ellips: {tmm_time * 1e3:.0f} ms for the full grid (best of 3 passes over {subset.size} random "
          f"points, scaled x{points / subset.size:.1f})")
    print(f"speed-up of solve over tmm: {tmm_time / best:.0f}x best/best, {tmm_time / median:.0f}x against the "
          f"median of solve; largest |difference| on the subset: {worst:.1e} deg")


if __name__ == "__main__":
    main()
