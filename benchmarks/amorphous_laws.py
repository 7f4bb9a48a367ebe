"""Speed of the Tauc-Lorentz, Cody-Lorentz and Gaussian laws (run: python benchmarks/amorphous_laws.py).

Each law on 1000 wavelengths (250-1450 nm), alone and for a batch of 256
parameter sets.  Cody-Lorentz computes eps1 numerically: its first call for a
set of energies builds the Kramers-Kronig weight matrix (cached afterwards, as
in a fit), so the first and the repeated calls are timed apart.
"""
from __future__ import annotations

import time

import numpy as np

from lamina.dispersion import from_toml
from lamina.dispersion import cody_lorentz

WAVELENGTHS = np.linspace(250.0, 1450.0, 1000)
BATCH = 256

LAWS = {
    "tauc_lorentz (1 osc.)": ({"law": "tauc_lorentz", "eps_inf": 1.15, "gap_ev": 1.2, "oscillators": [
        {"amplitude_ev": 122.0, "center_ev": 3.45, "broadening_ev": 2.54}]}, "oscillators.1.center_ev"),
    "tauc_lorentz (3 osc.)": ({"law": "tauc_lorentz", "eps_inf": 1.5, "gap_ev": 4.5, "oscillators": [
        {"amplitude_ev": 60.0, "center_ev": 8.0, "broadening_ev": 1.5},
        {"amplitude_ev": 20.0, "center_ev": 10.0, "broadening_ev": 3.0},
        {"amplitude_ev": 5.0, "center_ev": 6.0, "broadening_ev": 2.0}]}, "oscillators.1.center_ev"),
    "gaussian (2 bands)": ({"law": "gaussian", "eps_inf": 2.0, "oscillators": [
        {"amplitude": 1.2, "center_ev": 4.0, "broadening_ev": 1.0},
        {"amplitude": 0.3, "center_ev": 1.5, "broadening_ev": 0.4}]}, "oscillators.1.center_ev"),
    "cody_lorentz (tail)": ({"law": "cody_lorentz", "eps_inf": 1.0, "amplitude_ev": 100.0, "center_ev": 3.6,
                             "broadening_ev": 2.4, "gap_ev": 1.65, "transition_ev": 1.0,
                             "tail_onset_ev": 1.8, "urbach_ev": 0.05}, "center_ev"),
}


def best_of(fn, repeats: int = 5) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    print(f"{'law':26s} {'first call':>12s} {'single':>10s} {'batch 256':>11s} {'per member':>11s}")
    for name, (table, key) in LAWS.items():
        law = from_toml(table, "bench")
        cody_lorentz._WEIGHT_CACHE.clear()
        cody_lorentz.integration_grid.cache_clear()
        first = best_of(lambda: law.nk(WAVELENGTHS), repeats=1)
        single = best_of(lambda: law.nk(WAVELENGTHS))
        values = {key: law.params[key].value * np.linspace(0.95, 1.05, BATCH)}
        batch = best_of(lambda: law.nk(WAVELENGTHS, values), repeats=3)
        print(f"{name:26s} {first * 1e3:10.2f}ms {single * 1e3:8.2f}ms {batch * 1e3:9.1f}ms "
              f"{batch / BATCH * 1e6:9.1f}us")


if __name__ == "__main__":
    main()
