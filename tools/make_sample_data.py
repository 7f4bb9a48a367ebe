"""Regenerate the bundled sample data (src/lamina/sample_data/) with lamina itself.

The scenario is invented for demonstration: the fictitious "Larkspur Optics pilot
line" grows thermal oxide and PECVD nitride on 150 mm Si wafers and coats glass.
Each measurement file is simulated from its sample model with "true" values that
differ a little from the model's starting values (so a fit has something to do),
plus Gaussian noise of typical instrument size (common practice: 0.02 deg in Psi,
0.05 deg in Delta, 0.002 in R and T), with a fixed seed so the files are
reproducible.  The true values are written into each file's header.

    python tools/make_sample_data.py            # rewrite the files
    python tools/make_sample_data.py --check    # exit 1 if any file would change
"""
from __future__ import annotations

import argparse
import sys
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

import lamina
from lamina.cli.simulate_cmd import add_noise, simulate_dataset
from lamina.data.writers import write_data

SAMPLE_DIR = Path(__file__).resolve().parents[1] / "src" / "lamina" / "sample_data"
SCENARIO = "Larkspur Optics pilot line (fictitious; data invented for demonstration)"
ELLIPS_NOISE = {"psi": 0.02, "delta": 0.05}   # deg, common practice for a spectroscopic instrument
RT_NOISE = {"R": 0.002, "T": 0.002}           # absolute, common practice


@dataclass
class Measurement:
    """One invented measurement: which model, which truth, which grid and noise."""

    output: str
    model: str
    truth: dict[str, float]
    wavelength_nm: np.ndarray
    angle_deg: np.ndarray
    quantities: tuple[str, ...]
    noise: dict[str, float]
    seed: int
    metadata: dict[str, str] = field(default_factory=dict)


MEASUREMENTS = [
    Measurement(
        output="oxide_on_si_ellips.csv", model="oxide_on_si.toml",
        truth={"oxide.thickness_nm": 102.37},
        wavelength_nm=np.arange(300.0, 1000.1, 10.0), angle_deg=np.array([65.0, 70.0, 75.0]),
        quantities=("psi", "delta"), noise=ELLIPS_NOISE, seed=4101,
        metadata={"sample": "wafer LK-0412-07, centre site", "process": "thermal oxidation, dry O2, target 100 nm"},
    ),
    Measurement(
        output="nitride_on_si_ellips.csv", model="nitride_on_si.toml",
        truth={"nitride.thickness_nm": 61.8, "nitride.material.eps_inf": 2.05, "nitride.material.gap_ev": 4.35,
               "nitride.material.oscillators.1.amplitude_ev": 135.0, "nitride.material.oscillators.1.center_ev": 7.6},
        wavelength_nm=np.arange(300.0, 1000.1, 10.0), angle_deg=np.array([65.0, 70.0, 75.0]),
        quantities=("psi", "delta"), noise=ELLIPS_NOISE, seed=4102,
        metadata={"sample": "wafer LK-0415-02, centre site", "process": "PECVD SiN, target 60 nm"},
    ),
    Measurement(
        output="nitride_on_si_reflectance.csv", model="nitride_on_si.toml",
        truth={"nitride.thickness_nm": 61.8, "nitride.material.eps_inf": 2.05, "nitride.material.gap_ev": 4.35,
               "nitride.material.oscillators.1.amplitude_ev": 135.0, "nitride.material.oscillators.1.center_ev": 7.6},
        wavelength_nm=np.arange(320.0, 1000.1, 20.0), angle_deg=np.array([0.0]),
        quantities=("R",), noise={"R": 0.002}, seed=4103,
        metadata={"sample": "wafer LK-0415-02, centre site",
                  "process": "PECVD SiN, target 60 nm; normal-incidence reflectometer"},
    ),
    Measurement(
        output="absorber_on_glass_rt.csv", model="absorber_on_glass.toml",
        truth={"absorber.thickness_nm": 38.5, "absorber.material.gap_ev": 1.62},
        wavelength_nm=np.arange(350.0, 1000.1, 10.0), angle_deg=np.array([0.0]),
        quantities=("R", "T"), noise=RT_NOISE, seed=4104,
        metadata={"sample": "coupon LK-G-118 (1 mm glass)", "process": "sputtered a-Si absorber, target 40 nm"},
    ),
]


def build(measurement: Measurement):
    stack = lamina.load_model(SAMPLE_DIR / measurement.model)
    truth = stack.with_values(measurement.truth)
    ds = simulate_dataset(truth, measurement.wavelength_nm, measurement.angle_deg, measurement.quantities)
    ds = add_noise(ds, measurement.noise, measurement.seed)
    ds.attrs = {}
    meta = {"data_kind": "synthetic", "scenario": SCENARIO, **measurement.metadata,
            "model_file": measurement.model,
            "noise": ", ".join(f"{k}={v:g}" for k, v in measurement.noise.items()),
            "seed": str(measurement.seed),
            "generator": "tools/make_sample_data.py"}
    for name, value in measurement.truth.items():
        meta[f"true_{name}"] = f"{value:g}"
    comments = ["INVENTED DATA for demonstration - simulated by lamina with noise, not measured",
                "do not use for any decision on real parts"]
    return ds, comments, meta


def same_data(fresh: Path, current: Path) -> bool:
    """Same grid, quantities and metadata, values equal to round-off.

    Numbers are compared with a relative tolerance of 1e-9 rather than byte for
    byte, so that a harmless change in the optics engine's floating-point
    operation order does not call the files stale.
    """
    a, b = lamina.read_data(fresh), lamina.read_data(current)
    ignore = ("source_file", "sha256")
    if {k: v for k, v in a.attrs.items() if k not in ignore} != {k: v for k, v in b.attrs.items() if k not in ignore}:
        return False
    if set(a.data_vars) != set(b.data_vars) or a.sizes != b.sizes:
        return False
    if not (np.array_equal(a["angle"], b["angle"]) and np.array_equal(a["wavelength"], b["wavelength"])):
        return False
    return all(np.allclose(a[n].values, b[n].values, rtol=1e-9, atol=1e-12, equal_nan=True) for n in a.data_vars)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="only check that the files are up to date")
    args = parser.parse_args(argv)
    stale = []
    for measurement in MEASUREMENTS:
        ds, comments, meta = build(measurement)
        target = SAMPLE_DIR / measurement.output
        if args.check:
            import tempfile
            with tempfile.TemporaryDirectory() as tmp:
                fresh = write_data(ds, Path(tmp) / target.name, comments=comments, metadata=meta)
                if not target.exists() or not same_data(fresh, target):
                    stale.append(target.name)
            continue
        write_data(ds, target, comments=comments, metadata=meta)
        print(f"wrote {target.relative_to(SAMPLE_DIR.parents[2])} ({target.stat().st_size} bytes)")
    if stale:
        print("out of date: " + ", ".join(stale), file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
