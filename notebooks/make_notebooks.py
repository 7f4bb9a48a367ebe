"""Write the example notebooks in this folder, without outputs: python notebooks/make_notebooks.py"""
from pathlib import Path

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

CAUTION = ("**Caution.** Results are model-dependent: they are only as good as the optical model and its "
           "assumptions. Verify against traceable reference samples before relying on them; what happens to a "
           "real wafer or part (scrap, rework, ship, release) follows local procedures and is decided by "
           "qualified staff.")
INVENTED = ("**All data here is invented for demonstration.** It belongs to a fictitious scenario, the "
            "*Larkspur Optics pilot line*, and was computed by lamina with added noise; it is not a "
            "measurement of any real sample (see `sample_data/README.md`).")


def md(text):
    return new_markdown_cell(text.strip())


def code(text):
    return new_code_cell(text.strip())


def notebook(cells):
    nb = new_notebook(cells=cells)
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    return nb


RUN_CLI = '''
import subprocess, sys

def lamina_cli(*args):
    """Run the `lamina` command (same Python as this notebook); print its output, return the exit code."""
    proc = subprocess.run([sys.executable, "-m", "lamina.cli", *map(str, args)], capture_output=True, text=True)
    print(proc.stdout + proc.stderr)
    return proc.returncode
'''

nb1 = notebook([
    md(f"""
# 01 - Fitting a thermal oxide on silicon

We fit the thickness of a thermal oxide on a silicon wafer from spectroscopic ellipsometry
(Psi and Delta at 65, 70 and 75 degrees), look at the fit quality, and then free the oxide's
refractive index as well to see what the correlation matrix says.

{INVENTED}

{CAUTION}
"""),
    code('''
import json
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd

import lamina
from lamina.data import sample_path

model_path = sample_path("oxide_on_si.toml")
data_path = sample_path("oxide_on_si_ellips.csv")
print(model_path.read_text())
'''),
    md("""
The model says: air / oxide (library material `SiO2`) / silicon (`Si`), with the oxide
thickness free between 0 and 500 nm, starting at the 100 nm target. The measurement file
holds Psi and Delta with their one-sigma uncertainties (`_err` columns).
"""),
    code('''
stack = lamina.load_model(model_path)
data = lamina.read_data(data_path)
print(data)
'''),
    code('''
result = lamina.fit(stack, data)
summary = result.to_dict()
print(summary["message"])
print("reduced chi-square:", round(summary["statistics"]["reduced_chi2"], 3))
pd.DataFrame(summary["parameters"]).T[["value", "stderr", "ci90", "unit", "at_bound"]]
'''),
    md("""
The data carry their own uncertainties, so a reduced chi-square near 1 says the model explains
the data to within the noise. Because this data set is synthetic, its header records the
thickness used to make it; the fitted value should lie within a few sigma of it.
"""),
    code('''
true_nm = float(data.attrs["true_oxide.thickness_nm"])
fitted = summary["parameters"]["oxide.thickness_nm"]
print(f"true {true_nm} nm, fitted {fitted['value']:.3f} +- {fitted['stderr']:.3f} nm, "
      f"off by {(fitted['value'] - true_nm) / fitted['stderr']:.1f} sigma")
'''),
    code('''
model = result.model_dataset
fig, axes = plt.subplots(1, 2, figsize=(11, 4))
for quantity, ax in zip(("psi", "delta"), axes):
    for angle in data["angle"].values:
        measured = data[quantity].sel(angle=angle)
        line, = ax.plot(data["wavelength"], model[quantity].sel(angle=angle), lw=1.2, label=f"model {angle:g} deg")
        ax.plot(data["wavelength"], measured, "o", ms=2.5, color=line.get_color(), label=f"data {angle:g} deg")
    ax.set_xlabel("wavelength (nm)")
    ax.set_ylabel(f"{quantity} (deg)")
axes[0].legend(fontsize=8)
plt.tight_layout()
'''),
    md("""
## Freeing the oxide's refractive index: what the correlation matrix says

A thin transparent film mostly fixes its *optical* thickness, index times thickness. If we let
the index float too (here: the oxide as a Cauchy law, n = A + B/lambda^2, with A and B free),
thickness and index can partly trade for each other. The correlation matrix of the fitted
parameters shows by how much.
"""),
    code('''
free_index_model = model_path.read_text().replace(
    'material = "SiO2"',
    'material = { law = "cauchy", A = { value = 1.46, min = 1.3, max = 1.7 }, '
    'B_um2 = { value = 0.004, min = 0.0, max = 0.05 } }')
Path("oxide_free_index.toml").write_text(free_index_model)
result_n = lamina.fit(lamina.load_model("oxide_free_index.toml"), data)
summary_n = result_n.to_dict()
print(summary_n["message"])
display(pd.DataFrame(summary_n["parameters"]).T[["value", "stderr", "unit"]])
names = list(summary_n["correlations"])
corr = pd.DataFrame([[1.0 if a == b else summary_n["correlations"][a].get(b, np.nan) for b in names] for a in names],
                    index=names, columns=names)
corr.round(3)
'''),
    code('''
def strongest_pair(correlations):
    pairs = {tuple(sorted((a, b))): r for a, row in correlations.items() for b, r in row.items() if a != b}
    (a, b), r = max(pairs.items(), key=lambda item: abs(item[1]))
    return a, b, r

for warning in summary_n["warnings"]:
    print("warning:", warning)
print("strongest correlation: %s / %s, r = %+.3f" % strongest_pair(summary_n["correlations"]))
print("thickness / A: r = %+.3f" % summary_n["correlations"]["oxide.thickness_nm"]["oxide.material.A"])
print(f"thickness sigma, index fixed: {summary['parameters']['oxide.thickness_nm']['stderr']:.4f} nm; "
      f"index free: {summary_n['parameters']['oxide.thickness_nm']['stderr']:.4f} nm")
'''),
    md("""
With three angles and a 300-1000 nm spectrum, a 100 nm oxide still separates thickness from
index fairly well; the pair that is hard to tell apart is usually the two Cauchy coefficients of
the same law. A *thin* film is different: a few nanometres of oxide shift Delta by an amount roughly
proportional to the thickness times a factor that depends on the film's index (the thin-film
limit), so index and thickness can compensate each other almost exactly. To see it we simulate a 5 nm oxide with the same model (invented data again,
with instrument-like noise of 0.02 deg in Psi and 0.05 deg in Delta) and fit it with the index
free.
"""),
    code('''
import xarray as xr

free_model = lamina.load_model("oxide_free_index.toml")
truth = free_model.with_values({"oxide.thickness_nm": 5.0})
simulated = lamina.simulate(truth, wavelength_nm=np.arange(300.0, 1001.0, 10.0), angle_deg=[65.0, 70.0, 75.0])
rng = np.random.default_rng(7)
thin = xr.Dataset({"psi": simulated["psi"] + rng.normal(0.0, 0.02, simulated["psi"].shape),
                   "delta": simulated["delta"] + rng.normal(0.0, 0.05, simulated["delta"].shape)})
thin["psi_err"] = xr.full_like(thin["psi"], 0.02)
thin["delta_err"] = xr.full_like(thin["delta"], 0.05)
result_thin = lamina.fit(free_model.with_values({"oxide.thickness_nm": 6.0}), thin).to_dict()
for label, s in (("oxide ~102 nm", summary_n), ("oxide 5 nm", result_thin)):
    t = s["parameters"]["oxide.thickness_nm"]
    r = s["correlations"]["oxide.thickness_nm"]["oxide.material.A"]
    print(f"{label:14s} thickness {t['value']:8.3f} +- {t['stderr']:.3f} nm   r(thickness, A) = {r:+.3f}")
for warning in result_thin["warnings"]:
    print("warning:", warning)
'''),
    md("""
How to read a correlation matrix:

* |r| close to 1 (the fitter warns above 0.95) means the data barely tell the two parameters
  apart: a change in one is almost compensated by the other. Their individual uncertainties grow
  even though the fit is just as good: compare the thickness sigmas above.
* A high correlation is not an error, but it limits what the measurement can say. Remedies are
  more information (more angles, a wider spectrum, a second film thickness of the same material
  fitted jointly) or fixing a parameter to a value known from elsewhere.
* The sigma values assume the model is right. If the model is wrong (a missing interface layer,
  the wrong substrate data), the numbers can be precise and still wrong.

## The same fit from the command line

`lamina fit` writes `result.json`, `fitted.toml`, `fit.csv`, plots and a self-contained
`report.html` into the output folder.
"""),
    code(RUN_CLI),
    code('''
code = lamina_cli("fit", data_path, "--model", model_path, "--quiet", "-o", "fit-out")
print("exit code", code)
print(sorted(p.name for p in Path("fit-out").iterdir()))
print(json.loads(Path("fit-out/result.json").read_text())["parameters"]["oxide.thickness_nm"])
'''),
    md(f"""
Open `fit-out/report.html` in a browser: the verdict comes first, then the parameters with
their uncertainties, the fit statistics, the plots, the fitted model and the provenance
(input file names and sha256). `lamina report fit-out` rebuilds it.

{CAUTION}
"""),
])

nb2 = notebook([
    md(f"""
# 02 - A wafer-map QA run

Two thermal-oxide wafers of lot LK-0412 were measured at 33 sites each (Psi and Delta at 70
degrees). We fit the oxide thickness at every site in parallel on dask with `lamina map`, judge
each wafer against a spec (limits and non-uniformity inside a 5 mm edge exclusion), and look
at the results.

{INVENTED}

{CAUTION}
"""),
    code('''
import json
import tomllib
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from IPython.display import Image, display

import lamina
from lamina.data import sample_path

map_path = sample_path("maps", "oxide_map.csv")
model_path = sample_path("maps", "oxide_map_model.toml")
spec_path = sample_path("maps", "oxide_map_spec.toml")
print(spec_path.read_text())
'''),
    code('''
wafer_map = lamina.read_map(map_path)
print(wafer_map.sizes)
fig, ax = plt.subplots(figsize=(5, 5))
ax.add_patch(plt.Circle((0, 0), 75, fill=False, color="0.4"))
ax.add_patch(plt.Circle((0, 0), 70, fill=False, color="0.6", ls="--"))
for wafer in np.unique(wafer_map["wafer"].values):
    on = wafer_map["wafer"].values == wafer
    ax.plot(wafer_map["x_mm"].values[on], wafer_map["y_mm"].values[on], "o", ms=4, label=wafer, alpha=0.7)
ax.set_aspect("equal"); ax.set_xlabel("x (mm)"); ax.set_ylabel("y (mm)"); ax.legend()
ax.set_title("measurement sites (solid: wafer edge, dashed: edge exclusion)");
'''),
    md("""
The map fit runs on a dask cluster (a local one here, `--workers 1` to be gentle on a small
machine; `--scheduler tcp://host:8786` sends the same work to a running cluster). Exit codes:
0 every wafer passes, 1 a spec fails, 2 bad input, 3 sites could not be fitted.
"""),
    code(RUN_CLI),
    code('''
code = lamina_cli("map", map_path, "--model", model_path, "--spec", spec_path, "--workers", "1", "--quiet",
                  "-o", "map-out")
print("exit code", code)
print(sorted(p.name for p in Path("map-out").iterdir()))
'''),
    code('''
summary = json.loads(Path("map-out/summary.json").read_text())
for wafer, entry in summary["wafers"].items():
    verdict = {True: "PASS", False: "FAIL", None: "not judged"}[entry["pass"]]
    print(f"{wafer}: {verdict}")
    for reason in entry["reasons"]:
        print("   -", reason)
pd.DataFrame({wafer: entry["parameters"]["oxide.thickness_nm"] for wafer, entry in summary["wafers"].items()}).T
'''),
    md("""
The statistics use only the fitted sites inside the edge exclusion. Non-uniformity here is
(max - min) / (2 mean) in percent. Below, every site's thickness against its distance from the
wafer centre, with the spec limits.
"""),
    code('''
sites = pd.read_csv("map-out/sites.csv")
spec = tomllib.loads(spec_path.read_text())
limits = spec["limits"]["oxide.thickness_nm"]
sites["radius_mm"] = np.hypot(sites["x_mm"], sites["y_mm"])
fig, ax = plt.subplots(figsize=(7, 4))
for wafer, part in sites.groupby("wafer"):
    ax.errorbar(part["radius_mm"], part["oxide.thickness_nm"], yerr=part["oxide.thickness_nm.stderr"],
                fmt="o", ms=4, label=wafer)
for bound in (limits["lower"], limits["upper"]):
    ax.axhline(bound, color="0.3", ls="--", lw=1)
ax.axvspan(75 - spec["wafer"]["edge_exclusion_mm"], 75, color="0.9", label="edge exclusion")
ax.set_xlabel("distance from centre (mm)"); ax.set_ylabel("oxide thickness (nm)"); ax.legend();
sites[sites["pass"] == False][["wafer", "site", "x_mm", "y_mm", "oxide.thickness_nm"]]
'''),
    code('''
pngs = sorted(Path("map-out").glob("map_*.png"))
print([p.name for p in pngs])
display(Image(filename=str(pngs[-1]), width=520))
'''),
    md(f"""
`map-out/report.html` gathers all of this in one file that opens offline: the verdict per wafer
with its reasons first, then statistics, failed and out-of-spec sites, plots and provenance.

A failing wafer in this run is a signal to look closer, not a disposition: check the model
(is a single oxide layer on silicon still the right description at the edge?), the site data
and the spec, then follow your own procedures.

{CAUTION}
"""),
])

nb3 = notebook([
    md(f"""
# 03 - Checking a coating recipe

Recipe AR4-VIS rev B is a four-layer anti-reflection coating (TiO2 / SiO2 pairs) on N-BK7
glass. We predict its reflectance, check it against the target bands and colour, estimate the
production yield under the coater's tolerances by Monte Carlo, and diagnose a coated part whose
spectrum misses the target.

{INVENTED}

{CAUTION}
"""),
    code('''
import json
import tomllib
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd

import lamina
from lamina.data import sample_path

recipe_path = sample_path("coatings", "ar4_recipe.toml")
target_path = sample_path("coatings", "ar4_target.toml")
tolerances_path = sample_path("coatings", "ar4_tolerances.toml")
part_path = sample_path("coatings", "ar4_part_0412.csv")

recipe = lamina.load_model(recipe_path)
pd.DataFrame([{"layer (air side first)": layer.name, "thickness_nm": layer.thickness_nm.value}
              for layer in recipe.layers])
'''),
    code('''
target = tomllib.loads(target_path.read_text())
wavelength_nm = np.arange(400.0, 751.0, 2.0)
design = lamina.simulate(recipe, wavelength_nm=wavelength_nm, angle_deg=[0.0, 30.0])
fig, ax = plt.subplots(figsize=(8, 4))
for angle in (0.0, 30.0):
    ax.plot(wavelength_nm, 100 * design["R"].sel(angle=angle), label=f"design, {angle:g} deg")
for band in target["bands"]:
    lo, hi = band["wavelength_nm"]
    ax.hlines(100 * band["max"], lo, hi, colors="0.3", linestyles="--")
    ax.text(lo, 100 * band["max"] + 0.05, f"{band['name']} ({band['angle_deg']:g} deg)", fontsize=8)
ax.set_xlabel("wavelength (nm)"); ax.set_ylabel("reflectance (%)"); ax.set_ylim(0, 3); ax.legend();
'''),
    md("""
`lamina check` does the whole job: the design against every band (margin: positive inside the
spec), the reflected colour under D65 against the target (Delta E 2000), the sensitivity of each
band to each layer's thickness, the Monte Carlo yield under the tolerances, and, with
`--measured`, the measured part against the bands plus a drift diagnosis (which layer is off).
Exit codes: 0 every checked item passes, 1 something fails, 2 bad input.
"""),
    code(RUN_CLI),
    code('''
code = lamina_cli("check", recipe_path, "--target", target_path, "--tolerances", tolerances_path,
                  "--measured", part_path, "--trials", "2000", "--seed", "1", "--quiet", "-o", "check-out")
print("exit code", code)
check = json.loads(Path("check-out/check.json").read_text())
pd.DataFrame(check["design"]["bands"])
'''),
    code('''
y = check["yield"]
print(f"yield {100 * y['pass_fraction']:.1f} % (95 % interval {100 * y['ci95'][0]:.1f}-{100 * y['ci95'][1]:.1f} %) "
      f"over {y['trials']} trials; required {100 * y.get('min_yield', float('nan')):.0f} %; "
      f"most critical layer: {y['worst_layer']}")
print("layers by criticality:", ", ".join(check["sensitivity"]["ranking"]))
'''),
    md("""
## The measured part

Part 0412 was coated with this recipe and measured at normal incidence. Its bands and the drift
diagnosis (all layer thicknesses fitted, starting from the recipe) come next; the largest
deviation is listed first.
"""),
    code('''
measured = check["measured"]
print("measured part:", "PASS" if measured["pass"] else "FAIL")
display(pd.DataFrame(measured["bands"]))
pd.DataFrame(measured["drift"]).T
'''),
    code('''
part = lamina.read_data(part_path)
fig, ax = plt.subplots(figsize=(8, 4))
angle = float(part["angle"].values[0])
ax.plot(part["wavelength"], 100 * part["R"].sel(angle=angle), ".", ms=3, label="measured part 0412")
design_part = lamina.simulate(recipe, wavelength_nm=part["wavelength"].values, angle_deg=angle)
ax.plot(part["wavelength"], 100 * design_part["R"].sel(angle=angle), label="design")
ax.set_xlabel("wavelength (nm)"); ax.set_ylabel("reflectance (%)"); ax.set_ylim(0, 3); ax.legend();
'''),
    md(f"""
The diagnosis names the layer whose fitted thickness departs most from the recipe. That points
the coater engineer to where to look (a tooling factor, a crystal monitor); it is a model-based
estimate, and several layers can trade off against each other, so check the fit's uncertainties
and correlations before adjusting a process. `check-out/report.html` has the full picture.

{CAUTION}
"""),
])

NOTEBOOKS = {"01_oxide_on_silicon.ipynb": nb1, "02_wafer_map_qa.ipynb": nb2, "03_coating_recipe_check.ipynb": nb3}


def main() -> None:
    for name, nb in NOTEBOOKS.items():
        nbformat.validate(nb)
        nbformat.write(nb, Path(__file__).resolve().parent / name)
        print("wrote", name)


if __name__ == "__main__":
    main()
