"""Regenerate the bundled sample wafer map (src/lamina/sample_data/maps/) with lamina itself.

INVENTED DATA for demonstration.  The fictitious "Larkspur Optics pilot line"
grows thermal oxide on 150 mm Si wafers; this map holds two wafers of one lot,
33 sites each (centre, 8 at 30 mm, 16 at 60 mm, 8 at 72 mm inside the 5 mm edge
exclusion's band), Psi and Delta at 70 deg, 400-1000 nm.  The "true" oxide
thickness follows a made-up bowl-and-tilt profile per wafer; Gaussian noise of
typical instrument size (common practice: 0.02 deg in Psi, 0.05 deg in Delta) comes
from a fixed seed, so the file is reproducible.  Wafer LK-0412-08 is made thick
enough at 60 mm to fail the sample spec's upper limit, so the demo shows a failure.

    python tools/make_sample_map.py            # rewrite the files
    python tools/make_sample_map.py --check    # exit 1 if the map file would change
"""
from __future__ import annotations

import argparse
import math
import sys
import tempfile
from pathlib import Path

import numpy as np

import lamina
from lamina.data.writers import atomic_write_text

MAP_DIR = Path(__file__).resolve().parents[1] / "src" / "lamina" / "sample_data" / "maps"
MODEL = "oxide_map_model.toml"
OUTPUT = "oxide_map.csv"
WAVELENGTH_NM = np.arange(400.0, 1000.1, 20.0)
ANGLE_DEG = 70.0
NOISE_DEG = {"psi": 0.02, "delta": 0.05}
SEED = 4120
#: wafer -> (centre nm, bowl nm at r = 70 mm, tilt nm per 70 mm in x); invented
WAFERS = {"LK-0412-07": (100.6, 1.6, 0.25), "LK-0412-08": (101.6, 2.4, -0.2)}
RINGS = ((0.0, 1), (30.0, 8), (60.0, 16), (72.0, 8))


def layout():
    labels, x_mm, y_mm = [], [], []
    for radius, count in RINGS:
        for j in range(count):
            theta = 2 * math.pi * j / count + (math.pi / count if radius == 72.0 else 0.0)
            labels.append(f"S{len(labels) + 1:02d}")
            x_mm.append(round(radius * math.cos(theta), 2) + 0.0)
            y_mm.append(round(radius * math.sin(theta), 2) + 0.0)
    return labels, np.array(x_mm), np.array(y_mm)


def true_thickness_nm(wafer: str, x_mm, y_mm):
    centre, bowl, tilt = WAFERS[wafer]
    return centre + bowl * (np.hypot(x_mm, y_mm) / 70.0) ** 2 + tilt * x_mm / 70.0


def build_text() -> str:
    stack = lamina.load_model(MAP_DIR / MODEL)
    labels, x_mm, y_mm = layout()
    rng = np.random.default_rng(SEED)
    lines = ["# INVENTED DATA for demonstration - simulated by lamina with noise, not measured",
             "# do not use for any decision on real parts",
             "# data_kind: synthetic",
             "# scenario: Larkspur Optics pilot line (fictitious; data invented for demonstration)",
             "# process: thermal oxidation, dry O2, target 100 nm; lot LK-0412",
             f"# model_file: {MODEL}",
             f"# noise: psi={NOISE_DEG['psi']}, delta={NOISE_DEG['delta']}",
             f"# seed: {SEED}",
             "# generator: tools/make_sample_map.py",
             "# true profile: t = centre + bowl (r/70 mm)^2 + tilt x/70 mm; " +
             "; ".join(f"{w}: {c} nm, {b} nm, {t} nm" for w, (c, b, t) in WAFERS.items()),
             "wafer,site,x_mm,y_mm,wavelength_nm,angle_deg,psi_deg,psi_err_deg,delta_deg,delta_err_deg"]
    for wafer in WAFERS:
        thickness = true_thickness_nm(wafer, x_mm, y_mm)
        spectra = lamina.simulate(stack, wavelength_nm=WAVELENGTH_NM, angle_deg=[ANGLE_DEG],
                                  values={"oxide.thickness_nm": thickness})
        psi = spectra["psi"].transpose("batch", "angle", "wavelength").values[:, 0, :]
        delta = spectra["delta"].transpose("batch", "angle", "wavelength").values[:, 0, :]
        psi = psi + rng.normal(0.0, NOISE_DEG["psi"], psi.shape)
        delta = np.mod(delta + rng.normal(0.0, NOISE_DEG["delta"], delta.shape), 360.0)
        for i, label in enumerate(labels):
            for w, wavelength in enumerate(WAVELENGTH_NM):
                lines.append(f"{wafer},{label},{x_mm[i]:g},{y_mm[i]:g},{wavelength:g},{ANGLE_DEG:g},"
                             f"{psi[i, w]:.4f},{NOISE_DEG['psi']:g},{delta[i, w]:.4f},{NOISE_DEG['delta']:g}")
    return "\n".join(lines) + "\n"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="only check that the map file is up to date")
    args = parser.parse_args(argv)
    text = build_text()
    target = MAP_DIR / OUTPUT
    if args.check:
        if not target.exists() or target.read_text(encoding="utf-8") != text:
            print(f"out of date: {target.name}", file=sys.stderr)
            return 1
        return 0
    atomic_write_text(target, text)
    print(f"wrote {target} ({target.stat().st_size} bytes)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
