"""Regenerate the sample coating files in src/lamina/sample_data/coatings/.

INVENTED DEMO DATA of the fictitious "Larkspur Optics pilot line": a 4-layer
broadband anti-reflection coating (TiO2 / SiO2, our own design, optimised
for a flat low reflectance over 420-680 nm) on N-BK7 glass, its target and
tolerance files, and one "measured" part on which the second TiO2 layer came
out 5 % thick.  The "measurement" is simulated with lamina itself plus
Gaussian noise; no real part was measured.

    python tools/make_sample_coatings.py [--check]

--check regenerates into a temporary folder and fails if the shipped files differ.
"""
from __future__ import annotations

import argparse
import filecmp
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "src" / "lamina" / "sample_data" / "coatings"

#: the part's deposition error: layer H2 5 % thick (the drift the demo finds)
PART_ERRORS_PCT = {"H2": 5.0}
NOISE_R = 0.0004  # one-sigma noise of the simulated reflectance
SEED = 20261201

RECIPE = """\
# Larkspur Optics pilot line -- INVENTED DEMO DATA (fictitious line, no real product)
# Recipe AR4-VIS rev B: 4-layer broadband visible anti-reflection coating on N-BK7.
# Layers are listed from the air side down to the glass; H = TiO2, L = SiO2 as
# deposited on the pilot line's (fictitious) ion-assisted e-beam coater.
# The backside of the witness glass is assumed roughened and blackened, so the
# substrate is semi-infinite (no backside reflection).
name = "AR4-VIS rev B (Larkspur Optics pilot line, invented demo)"

[ambient]
material = "air"

# layer optical constants: the pilot line's own Cauchy fits (invented numbers)
[[layers]]
name = "L2"
thickness_nm = 88.2
material = { law = "cauchy", A = 1.452, B_um2 = 0.0036 }

[[layers]]
name = "H2"
thickness_nm = 114.6
material = { law = "cauchy", A = 2.21, B_um2 = 0.029, C_um4 = 0.0032 }

[[layers]]
name = "L1"
thickness_nm = 34.6
material = { law = "cauchy", A = 1.452, B_um2 = 0.0036 }

[[layers]]
name = "H1"
thickness_nm = 12.5
material = { law = "cauchy", A = 2.21, B_um2 = 0.029, C_um4 = 0.0032 }

# N-BK7: Sellmeier coefficients of the SCHOTT N-BK7 data sheet
[substrate.material]
law = "sellmeier"
terms = [
    { B = 1.03961212, C_um2 = 0.00600069867 },
    { B = 0.231792344, C_um2 = 0.0200179144 },
    { B = 1.01046945, C_um2 = 103.560653 },
]
"""

TARGET = """\
# Larkspur Optics pilot line -- INVENTED DEMO DATA (fictitious line, no real product)
# Target of recipe AR4-VIS rev B (see docs/recipes.md for the schema).
# Reflectance R is a fraction (0.005 = 0.5 %).
name = "AR4-VIS acceptance (invented)"
min_yield = 0.9

[[bands]]
name = "visible anti-reflection"
quantity = "R"
angle_deg = 0.0
polarization = "unpolarized"
wavelength_nm = [430.0, 670.0]
max = 0.005

[[bands]]
name = "photopic core"
quantity = "R"
angle_deg = 0.0
wavelength_nm = [480.0, 620.0]
max = 0.0025

[[bands]]
name = "oblique 30 deg"
quantity = "R"
angle_deg = 30.0
polarization = "unpolarized"
wavelength_nm = [450.0, 650.0]
max = 0.006

# reflected colour under D65, 10 degree observer
[color]
L = {L:.1f}
a = {a:.1f}
b = {b:.1f}
max_delta_e = 4.0
observer = 10
mode = "reflected"
angle_deg = 0.0
"""

TOLERANCES = """\
# Larkspur Optics pilot line -- INVENTED DEMO DATA (fictitious line, no real product)
# Production tolerances of the (fictitious) coater for recipe AR4-VIS rev B.
[tolerances.default]
thickness_pct = 0.7          # 1-sigma, per layer, independent
index_pct = 0.2              # 1-sigma relative scale on each layer's N
distribution = "gaussian"

[tolerances.layers.H1]
thickness_nm = 0.3           # the thin match layer is held by a crystal monitor to 0.3 nm

[tolerances.run]
thickness_pct = 0.3          # common tooling-factor error of a run, shared by all layers
distribution = "gaussian"
"""


def design_lab(recipe_path: Path) -> np.ndarray:
    """Reflected Lab of the design (D65, 10 deg) -- the colour the target is centred on."""
    import lamina
    from lamina.qa.color import COLOR_GRID_NM, spectrum_to_xyz, xyz_to_lab

    stack = lamina.load_model(recipe_path)
    ds = lamina.simulate(stack, wavelength_nm=COLOR_GRID_NM, angle_deg=0.0)
    reflectance = ds["R"].sel(angle=0.0).values
    return xyz_to_lab(spectrum_to_xyz(reflectance, 10), 10)


def measured_part(recipe_path: Path, path: Path) -> None:
    """The simulated "measurement" of part 0412: H2 5 % thick, R at 0 deg, 380-800 nm, with noise."""
    import xarray as xr

    import lamina
    from lamina.data.writers import write_data

    stack = lamina.load_model(recipe_path)
    values = {f"{name}.thickness_nm": stack.layer(name).thickness_nm.value * (1 + pct / 100.0)
              for name, pct in PART_ERRORS_PCT.items()}
    part = stack.with_values(values)
    wavelength = np.arange(380.0, 800.1, 2.0)
    ds = lamina.simulate(part, wavelength_nm=wavelength, angle_deg=np.array([0.0]))
    rng = np.random.default_rng(SEED)
    reflectance = ds["R"].values + rng.normal(0.0, NOISE_R, ds["R"].shape)
    out = xr.Dataset({"R": (("angle", "wavelength"), np.clip(reflectance, 0.0, 1.0)),
                      "R_err": (("angle", "wavelength"), np.full(ds["R"].shape, NOISE_R))},
                     coords={"angle": ds["angle"].values, "wavelength": wavelength})
    write_data(out, path, comments=[
        "Larkspur Optics pilot line -- INVENTED DEMO DATA (simulated, not measured)",
        "part 0412 of recipe AR4-VIS rev B; layer H2 deposited 5 % thick on purpose",
        f"normal-incidence reflectance with Gaussian noise sigma {NOISE_R} (seed {SEED})",
    ])


def generate(folder: Path) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    recipe = folder / "ar4_recipe.toml"
    recipe.write_text(RECIPE)
    lab = design_lab(recipe)
    # the target colour: the design's own colour, rounded (the design must pass)
    (folder / "ar4_target.toml").write_text(TARGET.replace("{L:.1f}", f"{lab[0]:.1f}")
                                            .replace("{a:.1f}", f"{lab[1]:.1f}").replace("{b:.1f}", f"{lab[2]:.1f}"))
    (folder / "ar4_tolerances.toml").write_text(TOLERANCES)
    measured_part(recipe, folder / "ar4_part_0412.csv")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="compare with the shipped files instead of writing")
    args = parser.parse_args()
    if not args.check:
        generate(OUT)
        print(f"wrote {OUT}")
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        generate(Path(tmp))
        names = sorted(p.name for p in Path(tmp).iterdir())
        _, mismatch, errors = filecmp.cmpfiles(tmp, OUT, names, shallow=False)
        if mismatch or errors:
            print("differs: " + ", ".join(mismatch + errors))
            return 1
    print("sample coatings up to date")
    return 0


if __name__ == "__main__":
    sys.exit(main())
