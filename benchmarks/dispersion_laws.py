"""Speed of the dispersion laws and the material library (run: python benchmarks/dispersion_laws.py).

Evaluates each law on 1000 wavelengths, alone and for a batch of 256 parameter
sets (the shape the fitter and the wafer-map code use), and times library lookups.
"""
from __future__ import annotations

import time

import numpy as np

from lamina import materials
from lamina.dispersion import from_toml

WAVELENGTHS = np.linspace(250.0, 1450.0, 1000)
BATCH = 256

LAWS = {
    "cauchy": ({"law": "cauchy", "A": 1.46, "B_um2": 0.004, "k_amplitude": 0.001}, "A"),
    "sellmeier": ({"law": "sellmeier", "terms": [{"B": 0.7, "C_um2": 0.0047}, {"B": 0.4, "C_um2": 0.0135},
                                                 {"B": 0.9, "C_um2": 97.9}]}, "terms.1.B"),
    "lorentz (3 osc.)": ({"law": "lorentz", "eps_inf": 1.5, "oscillators": [
        {"amplitude": 1.0, "center_ev": 3.5, "broadening_ev": 0.3},
        {"amplitude": 0.5, "center_ev": 4.5, "broadening_ev": 0.5},
        {"amplitude": 0.2, "center_ev": 6.0, "broadening_ev": 1.0}]}, "oscillators.1.center_ev"),
    "sum (drude + lorentz)": ({"law": "sum", "eps_inf": 3.6, "terms": [
        {"law": "drude", "plasma_ev": 1.9, "broadening_ev": 0.12},
        {"law": "lorentz", "oscillators": [{"amplitude": 0.8, "center_ev": 5.5, "broadening_ev": 0.5}]}]},
        "terms.1.plasma_ev"),
    "bruggeman 2": ({"law": "bruggeman", "components": [
        {"material": {"law": "sellmeier", "terms": [{"B": 1.1, "C_um2": 0.01}]}},
        {"material": {"law": "constant", "n": 1.0}}], "fractions": [0.5]}, "fractions.1"),
    "bruggeman 3": ({"law": "bruggeman", "components": [
        {"material": {"law": "sellmeier", "terms": [{"B": 1.1, "C_um2": 0.01}]}},
        {"material": {"law": "drude", "plasma_ev": 8.0, "broadening_ev": 0.1}},
        {"material": {"law": "constant", "n": 1.0}}], "fractions": [0.5, 0.1]}, "fractions.1"),
    "maxwell_garnett": ({"law": "maxwell_garnett", "components": [
        {"material": {"law": "drude", "plasma_ev": 8.0, "broadening_ev": 0.1}},
        {"material": {"law": "constant", "n": 1.5}}], "fractions": [0.05]}, "fractions.1"),
}


def best_of(fn, repeat=5) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    print(f"{'law':<24} {'1 x 1000 wl':>12} {f'{BATCH} x 1000 wl':>14}")
    for label, (table, key) in LAWS.items():
        law = from_toml(table, label)
        base = law.params[key].value
        batch = {key: np.linspace(base * 0.9, min(base * 1.1, law.specs[key].upper), BATCH)}
        single = best_of(lambda: law.nk(WAVELENGTHS))
        many = best_of(lambda: law.nk(WAVELENGTHS, batch))
        print(f"{label:<24} {single * 1e3:>10.2f} ms {many * 1e3:>12.2f} ms")
    si = materials.get("Si")
    print(f"{'table (Si, Green 2008)':<24} {best_of(lambda: si.nk(WAVELENGTHS)) * 1e3:>10.2f} ms")
    start = time.perf_counter()
    for name in materials.names():
        materials.get(name)
    print(f"first lookup of all {len(materials.names())} library materials: {(time.perf_counter() - start) * 1e3:.0f} ms")
    print(f"cached lookup of SiO2: {best_of(lambda: materials.get('SiO2'), 50) * 1e6:.0f} us")


if __name__ == "__main__":
    main()
