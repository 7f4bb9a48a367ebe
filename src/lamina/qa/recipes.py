"""Coating targets and tolerances (TOML, lamina's own schema) and band checks.

A *recipe* is a model file (the stack with nominal thicknesses).  A *target*
file says what its spectrum must do: a list of spectral bands, an optional
reflected or transmitted colour, an optional minimum yield.  A *tolerance*
set says how much each layer may be off in production.  The full reference
is docs/recipes.md; the schema in brief:

    min_yield = 0.9                       # optional, fraction 0..1

    [[bands]]
    name = "visible anti-reflection"
    quantity = "R"                        # R, T, A, psi, delta
    angle_deg = 0.0                       # default 0
    polarization = "unpolarized"          # s, p, unpolarized (R, T, A only)
    wavelength_nm = [450.0, 650.0]
    step_nm = 1.0                         # optional grid step, default 1 nm
    max = 0.005                           # and/or min; or target + tolerance

    [color]                               # optional
    L = 30.0
    a = 0.0
    b = -5.0
    max_delta_e = 3.0
    observer = 2                          # 2 or 10
    mode = "reflected"                    # or "transmitted"
    angle_deg = 0.0

    [tolerances.default]                  # optional here, or in a separate file
    thickness_pct = 1.0                   # or thickness_nm
    index_pct = 0.0                       # relative scale on the layer's N
    distribution = "gaussian"             # "gaussian" (sigma) or "uniform" (half-width)
    [tolerances.layers.H1]
    thickness_nm = 2.0
    [tolerances.run]                      # one common relative thickness scale per run
    thickness_pct = 0.5
    distribution = "gaussian"

Margins are positive inside the spec and negative outside, in the quantity's
own units (R, T, A as fractions 0..1; psi, delta in degrees).
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Mapping

import numpy as np

from ..errors import LaminaInputError

QUANTITIES = ("R", "T", "A", "psi", "delta")
POLARIZATIONS = ("unpolarized", "s", "p")
DISTRIBUTIONS = ("gaussian", "uniform")
#: physical range of each quantity: the allowed width of a one-sided spec is
#: measured to these bounds (used to normalise sensitivities).
PHYSICAL_RANGE = {"R": (0.0, 1.0), "T": (0.0, 1.0), "A": (0.0, 1.0), "psi": (0.0, 90.0), "delta": (0.0, 360.0)}
DEFAULT_STEP_NM = 1.0


@dataclass(frozen=True)
class Band:
    """One spectral band of a target: quantity, geometry, wavelength span and limits."""

    name: str
    quantity: str
    wavelength_nm: tuple[float, float]
    angle_deg: float = 0.0
    polarization: str = "unpolarized"
    min: float | None = None
    max: float | None = None
    step_nm: float = DEFAULT_STEP_NM

    def grid_nm(self) -> np.ndarray:
        """Evaluation wavelengths: start to end inclusive at `step_nm` (end always included)."""
        lo, hi = self.wavelength_nm
        count = int(math.floor((hi - lo) / self.step_nm + 1e-9)) + 1
        grid = lo + self.step_nm * np.arange(count)
        if hi - grid[-1] > 1e-9:
            grid = np.append(grid, hi)
        return grid

    def margin(self, values) -> np.ndarray:
        """Margin at every point (positive = inside); `values` (..., W) in the quantity's units."""
        values = np.asarray(values, dtype=float)
        margin = np.full(values.shape, np.inf)
        if self.max is not None:
            margin = np.minimum(margin, self.max - values)
        if self.min is not None:
            margin = np.minimum(margin, values - self.min)
        return margin

    def allowed_width(self) -> float:
        """Width of the allowed region, to the quantity's physical bounds for one-sided specs."""
        lo_phys, hi_phys = PHYSICAL_RANGE[self.quantity]
        lo = self.min if self.min is not None else lo_phys
        hi = self.max if self.max is not None else hi_phys
        return max(hi - lo, 1e-12)


@dataclass(frozen=True)
class ColorTarget:
    """Target colour in CIELAB with a Delta E 2000 limit."""

    lab: tuple[float, float, float]
    max_delta_e: float
    observer: int = 2
    mode: str = "reflected"
    angle_deg: float = 0.0


@dataclass(frozen=True)
class ErrorSpec:
    """Error of one layer: thickness (relative or absolute) and index scale, one distribution."""

    thickness_pct: float = 0.0
    thickness_nm: float = 0.0
    index_pct: float = 0.0
    distribution: str = "gaussian"

    def thickness_scale_nm(self, nominal_nm: float) -> float:
        """Sigma (gaussian) or half-width (uniform) of the thickness error, in nm."""
        return self.thickness_nm + nominal_nm * self.thickness_pct / 100.0


@dataclass(frozen=True)
class Tolerances:
    """Per-layer errors (default plus overrides) and a run-to-run common thickness scale."""

    default: ErrorSpec = field(default_factory=ErrorSpec)
    layers: Mapping[str, ErrorSpec] = field(default_factory=dict)
    run_thickness_pct: float = 0.0
    run_distribution: str = "gaussian"
    source: str = ""

    def for_layer(self, name: str) -> ErrorSpec:
        return self.layers.get(name, self.default)

    def check_layers(self, layer_names: list[str]) -> None:
        """Every layer named under [tolerances.layers] must exist in the recipe."""
        for name in self.layers:
            if name not in layer_names:
                raise LaminaInputError(f"layer '{name}' is not in the recipe", f"{self.source}: tolerances.layers.{name}",
                                       "one of " + ", ".join(layer_names))

    def is_zero(self) -> bool:
        specs = [self.default, *self.layers.values()]
        return self.run_thickness_pct == 0 and all(
            s.thickness_pct == 0 and s.thickness_nm == 0 and s.index_pct == 0 for s in specs)


@dataclass(frozen=True)
class Target:
    """What a recipe's spectrum must do."""

    bands: tuple[Band, ...]
    color: ColorTarget | None = None
    min_yield: float | None = None
    tolerances: Tolerances | None = None
    source: str = ""


# -- reading ------------------------------------------------------------------------------

def _read_toml(path) -> dict:
    path = Path(path)
    try:
        text = path.read_bytes()
    except FileNotFoundError:
        raise LaminaInputError("file not found", str(path), "an existing TOML file") from None
    except OSError as exc:
        raise LaminaInputError(f"cannot read file ({exc.strerror})", str(path), "a readable TOML file") from None
    try:
        return tomllib.loads(text.decode("utf-8"))
    except UnicodeDecodeError:
        raise LaminaInputError("not UTF-8 text", str(path), "a UTF-8 TOML file") from None
    except tomllib.TOMLDecodeError as exc:
        raise LaminaInputError(f"not valid TOML ({exc})", str(path), "a TOML file") from None


def _join(where: str, key: str) -> str:
    """Key path of `key` under `where` ("file.toml:" + key reads "file.toml: key")."""
    if not where:
        return key
    return f"{where} {key}" if where.endswith(":") else f"{where}.{key}"


def _check_keys(table: Mapping, allowed: set[str], where: str) -> None:
    for key in table:
        if key not in allowed:
            raise LaminaInputError(f"unknown key '{key}'", _join(where, key),
                                   "one of " + ", ".join(sorted(allowed)))


def _number(table: Mapping, key: str, where: str, *, lower: float | None = None, upper: float | None = None,
            strict_lower: bool = False, default=None):
    if key not in table:
        return default
    value = table[key]
    label = _join(where, key)
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise LaminaInputError(f"{key} = {value!r} is not a finite number", label, "a number")
    value = float(value)
    if lower is not None and (value < lower or (strict_lower and value == lower)):
        raise LaminaInputError(f"{key} = {value:g} is too small", label, f"{'>' if strict_lower else '>='} {lower:g}")
    if upper is not None and value > upper:
        raise LaminaInputError(f"{key} = {value:g} is too large", label, f"<= {upper:g}")
    return value


def _choice(table: Mapping, key: str, where: str, choices, default):
    value = table.get(key, default)
    if value not in choices:
        raise LaminaInputError(f"{key} = {value!r} is not allowed", f"{where}.{key}",
                               "one of " + ", ".join(str(c) for c in choices))
    return value


def parse_band(table, where: str) -> Band:
    """A Band from one [[bands]] table; `where` names the file and index."""
    if not isinstance(table, Mapping):
        raise LaminaInputError("is not a table", where, "a [[bands]] table")
    _check_keys(table, {"name", "quantity", "angle_deg", "polarization", "wavelength_nm", "step_nm",
                        "min", "max", "target", "tolerance"}, where)
    for key in ("quantity", "wavelength_nm"):
        if key not in table:
            raise LaminaInputError(f"missing key '{key}'", where, f"a '{key}' entry")
    name = table.get("name", where.rsplit(": ", 1)[-1])
    if not isinstance(name, str) or not name.strip():
        raise LaminaInputError(f"name = {name!r} is not a non-empty string", f"{where}.name", "a band name")
    if name == "color":
        raise LaminaInputError("the band name 'color' is reserved for the colour result", f"{where}.name",
                               "another band name")
    quantity = _choice(table, "quantity", where, QUANTITIES, None)
    polarization = _choice(table, "polarization", where, POLARIZATIONS, "unpolarized")
    if quantity in ("psi", "delta") and polarization != "unpolarized":
        raise LaminaInputError(f"polarization = '{polarization}' makes no sense for {quantity}",
                               f"{where}.polarization", "no polarization for psi and delta")
    span = table["wavelength_nm"]
    if (not isinstance(span, list) or len(span) != 2
            or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in span)):
        raise LaminaInputError(f"wavelength_nm = {span!r} is not a pair of numbers", f"{where}.wavelength_nm",
                               "[start_nm, end_nm]")
    lo, hi = float(span[0]), float(span[1])
    if not (0 < lo <= hi) or not math.isfinite(hi):
        raise LaminaInputError(f"wavelength_nm = [{lo:g}, {hi:g}] is not an increasing positive span",
                               f"{where}.wavelength_nm", "0 < start <= end")
    angle = _number(table, "angle_deg", where, lower=0.0, upper=89.9, default=0.0)
    step = _number(table, "step_nm", where, lower=0.0, strict_lower=True, default=DEFAULT_STEP_NM)
    low, high = _limits(table, where)
    return Band(name=name, quantity=quantity, wavelength_nm=(lo, hi), angle_deg=angle, polarization=polarization,
                min=low, max=high, step_nm=step)


def _limits(table: Mapping, where: str) -> tuple[float | None, float | None]:
    has_target = "target" in table or "tolerance" in table
    if has_target:
        if "min" in table or "max" in table:
            raise LaminaInputError("target/tolerance given together with min/max", where,
                                   "either min and/or max, or target with tolerance")
        if "target" not in table or "tolerance" not in table:
            missing = "tolerance" if "target" in table else "target"
            raise LaminaInputError(f"missing key '{missing}'", where, "target and tolerance together")
        centre = _number(table, "target", where)
        half = _number(table, "tolerance", where, lower=0.0)
        return centre - half, centre + half
    low = _number(table, "min", where)
    high = _number(table, "max", where)
    if low is None and high is None:
        raise LaminaInputError("no limit given", where, "min and/or max, or target with tolerance")
    if low is not None and high is not None and low > high:
        raise LaminaInputError(f"min = {low:g} is greater than max = {high:g}", f"{where}.min", "min <= max")
    return low, high


def parse_color(table, where: str) -> ColorTarget:
    if not isinstance(table, Mapping):
        raise LaminaInputError("is not a table", where, "a [color] table")
    _check_keys(table, {"L", "a", "b", "max_delta_e", "observer", "mode", "angle_deg"}, where)
    for key in ("L", "a", "b", "max_delta_e"):
        if key not in table:
            raise LaminaInputError(f"missing key '{key}'", where, f"a '{key}' entry")
    lab = (_number(table, "L", where, lower=0.0, upper=100.0), _number(table, "a", where), _number(table, "b", where))
    max_de = _number(table, "max_delta_e", where, lower=0.0)
    observer = _choice(table, "observer", where, (2, 10), 2)
    if isinstance(observer, bool):
        raise LaminaInputError("observer = true is not allowed", f"{where}.observer", "2 or 10")
    mode = _choice(table, "mode", where, ("reflected", "transmitted"), "reflected")
    angle = _number(table, "angle_deg", where, lower=0.0, upper=89.9, default=0.0)
    return ColorTarget(lab=lab, max_delta_e=max_de, observer=int(observer), mode=mode, angle_deg=angle)


def _parse_error_spec(table, where: str, base: ErrorSpec | None, allow_index: bool = True) -> ErrorSpec:
    if not isinstance(table, Mapping):
        raise LaminaInputError("is not a table", where, "a table of tolerances")
    allowed = {"thickness_pct", "thickness_nm", "distribution"} | ({"index_pct"} if allow_index else set())
    _check_keys(table, allowed, where)
    if "thickness_pct" in table and "thickness_nm" in table:
        raise LaminaInputError("both thickness_pct and thickness_nm given", where, "one of them")
    base = base or ErrorSpec()
    pct = _number(table, "thickness_pct", where, lower=0.0)
    nm = _number(table, "thickness_nm", where, lower=0.0)
    if pct is None and nm is None:  # inherit the default's thickness error
        pct, nm = base.thickness_pct, base.thickness_nm
    else:
        pct, nm = pct or 0.0, nm or 0.0
    index = _number(table, "index_pct", where, lower=0.0, default=base.index_pct)
    distribution = _choice(table, "distribution", where, DISTRIBUTIONS, base.distribution)
    return ErrorSpec(thickness_pct=pct, thickness_nm=nm, index_pct=index, distribution=distribution)


def parse_tolerances(table, where: str) -> Tolerances:
    """Tolerances from the [tolerances] table; `where` is e.g. 'tol.toml: tolerances'."""
    if not isinstance(table, Mapping):
        raise LaminaInputError("is not a table", where, "a [tolerances] table")
    _check_keys(table, {"default", "layers", "run"}, where)
    default = _parse_error_spec(table.get("default", {}), f"{where}.default", None)
    layers_table = table.get("layers", {})
    if not isinstance(layers_table, Mapping):
        raise LaminaInputError("is not a table", f"{where}.layers", "[tolerances.layers.<layer name>] tables")
    layers = {name: _parse_error_spec(sub, f"{where}.layers.{name}", default) for name, sub in layers_table.items()}
    run = table.get("run", {})
    run_spec = _parse_error_spec(run, f"{where}.run", None, allow_index=False)
    if "thickness_nm" in (run if isinstance(run, Mapping) else {}):
        raise LaminaInputError("the run-to-run error is a relative scale", f"{where}.run.thickness_nm",
                               "thickness_pct")
    source = where.split(": ", 1)[0]
    return Tolerances(default=default, layers=layers, run_thickness_pct=run_spec.thickness_pct,
                      run_distribution=run_spec.distribution, source=source)


def load_tolerances(path) -> Tolerances:
    """A tolerance file: a [tolerances] table (its sub-tables may also sit at top level)."""
    raw = _read_toml(path)
    if "tolerances" in raw:
        _check_keys(raw, {"tolerances"}, "")
        return parse_tolerances(raw["tolerances"], f"{path}: tolerances")
    return parse_tolerances(raw, f"{path}:")


def load_target(path) -> Target:
    """Read and check a target file; every problem names the file and key."""
    raw = _read_toml(path)
    where = str(path)
    _check_keys(raw, {"bands", "color", "min_yield", "tolerances", "name", "description"}, f"{where}:")
    bands_raw = raw.get("bands", [])
    if not isinstance(bands_raw, list):
        raise LaminaInputError("'bands' is not an array of tables", f"{where}: bands", "[[bands]] tables")
    bands = tuple(parse_band(b, f"{where}: bands.{i}") for i, b in enumerate(bands_raw, start=1))
    names = [b.name for b in bands]
    duplicate = next((n for n in names if names.count(n) > 1), None)
    if duplicate is not None:
        raise LaminaInputError(f"duplicate band name '{duplicate}'", f"{where}: bands", "unique band names")
    color = parse_color(raw["color"], f"{where}: color") if "color" in raw else None
    if not bands and color is None:
        raise LaminaInputError("no [[bands]] and no [color]", where, "at least one band or a colour target")
    min_yield = _number(raw, "min_yield", f"{where}:", lower=0.0, upper=1.0)
    tolerances = parse_tolerances(raw["tolerances"], f"{where}: tolerances") if "tolerances" in raw else None
    return Target(bands=bands, color=color, min_yield=min_yield, tolerances=tolerances, source=where)


# -- judging --------------------------------------------------------------------------------

def band_result(band: Band, wavelength_nm, values) -> dict:
    """Pass/fail, worst margin and where, of one band for one spectrum (W,) on `wavelength_nm`."""
    wavelength_nm = np.asarray(wavelength_nm, dtype=float)
    margin = band.margin(values)
    finite = np.isfinite(margin)
    if not finite.any():
        return {"name": band.name, "pass": None, "worst_margin": None, "at_nm": None,
                "reason": "no valid points in the band"}
    index = int(np.nanargmin(np.where(finite, margin, np.nan)))
    worst = float(margin[index])
    return {"name": band.name, "quantity": band.quantity, "pass": bool(worst >= 0), "worst_margin": worst,
            "at_nm": float(wavelength_nm[index]), "points": int(finite.sum())}


def wilson_interval(successes: int, trials: int, confidence_z: float = 1.959963984540054) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion (Wilson 1927, JASA 22, 209; Newcombe 1998 method 3)."""
    if trials <= 0:
        return (0.0, 1.0)
    p_hat = successes / trials
    z2 = confidence_z * confidence_z
    denom = 1.0 + z2 / trials
    centre = (p_hat + z2 / (2 * trials)) / denom
    half = confidence_z / denom * math.sqrt(p_hat * (1 - p_hat) / trials + z2 / (4 * trials * trials))
    return (max(0.0, centre - half), min(1.0, centre + half))


# -- fast batched evaluation of a recipe -----------------------------------------------------

@dataclass(frozen=True)
class Request:
    """One spectrum the checks need: a quantity at one angle on a wavelength grid."""

    key: str
    quantity: str
    polarization: str
    angle_deg: float
    wavelength_nm: np.ndarray


def band_requests(target: Target) -> list[Request]:
    """The spectra a target needs: one per band, plus the colour spectrum."""
    from .color import COLOR_GRID_NM

    requests = [Request(f"band:{b.name}", b.quantity, b.polarization, b.angle_deg, b.grid_nm()) for b in target.bands]
    if target.color is not None:
        quantity = "R" if target.color.mode == "reflected" else "T"
        requests.append(Request("color", quantity, "unpolarized", target.color.angle_deg, COLOR_GRID_NM))
    return requests


def _pick(result: Mapping[str, np.ndarray], quantity: str, polarization: str) -> np.ndarray:
    """One quantity from a solver result dict (arrays (..., A, W))."""
    if quantity in ("psi", "delta"):
        return result[quantity]
    suffix = {"unpolarized": "", "s": "s", "p": "p"}[polarization]
    if quantity == "A":
        if not suffix:
            return result["A"]
        # absorptance of one polarization: what is neither reflected nor transmitted
        return 1.0 - result["R" + suffix] - result["T" + suffix]
    return result[quantity + suffix]


def _solver_keys(quantity: str, polarization: str) -> tuple[str, ...]:
    """The solver outputs `_pick` reads for one request (so the solver skips the rest)."""
    if quantity in ("psi", "delta"):
        return (quantity,)
    suffix = {"unpolarized": "", "s": "s", "p": "p"}[polarization]
    if quantity == "A" and suffix:
        return ("R" + suffix, "T" + suffix)
    return (quantity + suffix,)


class RecipeEvaluator:
    """Spectra of a recipe and of many perturbed copies of it, without Python loops over them.

    The materials are evaluated once per angle group on the union of the
    requested wavelengths; a batch of B perturbed stacks is given as
    thicknesses (B, L) in nm and index scales (B, L) (N of layer j multiplied
    by the scale: n and k scale together), and goes through
    `lamina.optics.solve` in one call per angle.
    """

    def __init__(self, stack, requests: list[Request]):
        self.stack = stack
        self.requests = list(requests)
        self.layer_names = [layer.name for layer in stack.layers]
        self.nominal_nm = np.array([layer.thickness_nm.value for layer in stack.layers], dtype=float)
        self._groups: list[dict] = []
        for angle in sorted({r.angle_deg for r in self.requests}):
            members = [r for r in self.requests if r.angle_deg == angle]
            grid = np.unique(np.concatenate([r.wavelength_nm for r in members]))
            inputs = stack.optical_inputs(grid)
            index = {r.key: np.searchsorted(grid, r.wavelength_nm) for r in members}
            self._groups.append({"angle": angle, "grid": grid, "inputs": inputs, "members": members,
                                 "index": index})

    @property
    def n_layers(self) -> int:
        return len(self.layer_names)

    def spectra(self, thickness_nm=None, index_scale=None) -> dict[str, np.ndarray]:
        """Request key -> values (B, W_request); without arguments B = 1 (the design)."""
        from ..optics import solve

        thickness_nm = self.nominal_nm[None, :] if thickness_nm is None else np.atleast_2d(thickness_nm)
        batch = thickness_nm.shape[0]
        out: dict[str, np.ndarray] = {}
        for group in self._groups:
            n_media, thickness, coherent = group["inputs"]
            n_media = list(n_media)
            thickness = list(thickness)
            for j in range(self.n_layers):
                thickness[j] = np.ascontiguousarray(thickness_nm[:, j])
                if index_scale is not None:
                    scale = index_scale[:, j]
                    if np.any(scale != 1.0):
                        n = n_media[j + 1]
                        n = n if np.any(n.imag) else n.real  # a real index stays real: half the work
                        n_media[j + 1] = n[None, :] * scale[:, None]
            keys = {key for r in group["members"] for key in _solver_keys(r.quantity, r.polarization)}
            result = solve(n_media, thickness, coherent, group["grid"], np.array([group["angle"]]),
                           pseudo_dielectric=False, quantities=keys)  # only what the requests read
            for request in group["members"]:
                values = np.asarray(_pick(result, request.quantity, request.polarization))
                values = values.reshape(batch, -1)  # (B, 1, W) -> (B, W)
                out[request.key] = values[:, group["index"][request.key]]
        return out


def judge(target: Target, spectra: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Per band worst margin (B,) and colour Delta E (B,), and the overall pass (B,)."""
    judged: dict[str, np.ndarray] = {}
    passing = None
    for band in target.bands:
        worst = np.min(band.margin(spectra[f"band:{band.name}"]), axis=-1)
        judged[f"band:{band.name}"] = worst
        ok = worst >= 0
        passing = ok if passing is None else passing & ok
    if target.color is not None:
        from .color import delta_e_2000, spectrum_to_xyz, xyz_to_lab

        lab = xyz_to_lab(spectrum_to_xyz(spectra["color"], target.color.observer), target.color.observer)
        delta_e = delta_e_2000(lab, np.broadcast_to(np.asarray(target.color.lab), lab.shape))
        judged["color"] = np.atleast_1d(delta_e)
        ok = judged["color"] <= target.color.max_delta_e
        passing = ok if passing is None else passing & ok
    judged["pass"] = passing
    return judged


# -- the whole check ---------------------------------------------------------------------------

#: measured-data variable of a band's quantity and polarization
_MEASURED_NAME = {("R", "unpolarized"): "R", ("T", "unpolarized"): "T", ("R", "s"): "Rs", ("R", "p"): "Rp",
                  ("T", "s"): "Ts", ("T", "p"): "Tp", ("psi", "unpolarized"): "psi",
                  ("delta", "unpolarized"): "delta"}
#: two angles closer than this (deg) are the same angle of incidence
ANGLE_MATCH_DEG = 0.05
#: at most this many Monte Carlo trials feed the 5-95 % envelope of the plots
ENVELOPE_TRIALS = 500


def resolve_tolerances(target: Target, tolerance_path) -> Tolerances | None:
    """Tolerances from --tolerances or from the target's [tolerances]; both at once is an error."""
    if tolerance_path is not None and target.tolerances is not None:
        raise LaminaInputError("tolerances are given twice (in the target file and with --tolerances)",
                               f"{target.source}: tolerances", "one place for the tolerances")
    if tolerance_path is not None:
        return load_tolerances(tolerance_path)
    return target.tolerances


def design_report(evaluator: RecipeEvaluator, target: Target) -> tuple[dict, dict]:
    """Design verdict per band and colour, and the design spectra (request key -> (W,))."""
    spectra = {key: values[0] for key, values in evaluator.spectra().items()}
    bands = [band_result(b, b.grid_nm(), spectra[f"band:{b.name}"]) for b in target.bands]
    report: dict = {"bands": bands}
    passing = all(b["pass"] for b in bands)
    if target.color is not None:
        report["color"] = color_report(spectra["color"], target.color)
        passing = passing and report["color"]["pass"]
    report["pass"] = bool(passing)
    return report, spectra


def color_report(spectrum, color: ColorTarget) -> dict:
    """XYZ, xy, Lab of a spectrum on COLOR_GRID_NM and its Delta E 2000 to the target colour."""
    from .color import color_summary, delta_e_2000

    summary = color_summary(spectrum, color.observer)
    delta_e = float(delta_e_2000(summary["Lab"], color.lab))
    return {**summary, "target_Lab": list(color.lab), "delta_e": delta_e, "max_delta_e": color.max_delta_e,
            "pass": bool(delta_e <= color.max_delta_e), "observer": color.observer, "illuminant": "D65",
            "mode": color.mode, "angle_deg": color.angle_deg}


def _angle_index(data, angle_deg: float) -> int | None:
    angles = np.asarray(data["angle"].values, dtype=float)
    index = int(np.argmin(np.abs(angles - angle_deg)))
    return index if abs(angles[index] - angle_deg) <= ANGLE_MATCH_DEG else None


def measured_curve(data, quantity: str, polarization: str, angle_deg: float):
    """(wavelength_nm, values) of a measured quantity at an angle, NaN points dropped; None when absent."""
    index = _angle_index(data, angle_deg)
    if index is None:
        return None
    wavelength = np.asarray(data["wavelength"].values, dtype=float)
    if quantity == "A" and polarization == "unpolarized" and {"R", "T"} <= set(data.data_vars):
        values = 1.0 - data["R"].values[index] - data["T"].values[index]
    else:
        name = _MEASURED_NAME.get((quantity, polarization))
        if name is None or name not in data.data_vars:
            return None
        values = np.asarray(data[name].transpose("angle", "wavelength").values[index], dtype=float)
    ok = np.isfinite(values)
    if not ok.any():
        return None
    return wavelength[ok], values[ok]


def measured_bands(data, target: Target) -> list[dict]:
    """Each band judged on the measured points inside it (or the reason it cannot be)."""
    results = []
    for band in target.bands:
        curve = measured_curve(data, band.quantity, band.polarization, band.angle_deg)
        lo, hi = band.wavelength_nm
        if curve is not None:
            inside = (curve[0] >= lo - 1e-9) & (curve[0] <= hi + 1e-9)
            curve = (curve[0][inside], curve[1][inside]) if inside.any() else None
        if curve is None:
            results.append({"name": band.name, "quantity": band.quantity, "pass": None, "worst_margin": None,
                            "at_nm": None, "reason": f"not measured ({band.quantity}, {band.polarization}, "
                                                     f"{band.angle_deg:g} deg, {lo:g}-{hi:g} nm)"})
            continue
        results.append(band_result(band, curve[0], curve[1]))
    return results


def measured_color(data, color: ColorTarget) -> dict | None:
    """Colour of the measured part when its spectrum covers the colour range, else None."""
    from .color import COLOR_GRID_NM

    curve = measured_curve(data, "R" if color.mode == "reflected" else "T", "unpolarized", color.angle_deg)
    if curve is None or curve[0].min() > COLOR_GRID_NM[0] or curve[0].max() < COLOR_GRID_NM[-1]:
        return None
    return color_report(np.interp(COLOR_GRID_NM, curve[0], curve[1]), color)


def measured_report(stack, data, target: Target, source: str) -> tuple[dict, object]:
    """Measured part vs the bands (and colour), plus the drift diagnosis; (report, fitted stack)."""
    from .drift import diagnose_drift

    bands = measured_bands(data, target)
    judged = [b for b in bands if b["pass"] is not None]
    color = measured_color(data, target.color) if target.color is not None else None
    if not judged and color is None:
        raise LaminaInputError("the measured data cover none of the target's bands", source,
                               "measurements at the bands' quantity, polarization, angle and wavelengths")
    passing = all(b["pass"] for b in judged) and (color is None or color["pass"])
    report: dict = {"pass": bool(passing), "bands": bands}
    if color is not None:
        report["color"] = color
    drift = diagnose_drift(stack, data)
    fitted_stack = drift.pop("fitted_stack")
    report.update(drift)
    if not drift["fit"].get("converged", True):
        report["notes"] = ["the drift fit did not converge: read the fitted thicknesses with care"]
    return report, fitted_stack


def _valid_span_nm(stack) -> tuple[float, float]:
    """Wavelength span where every material of the stack is valid."""
    lo, hi = 0.0, math.inf
    materials = [stack.ambient, stack.substrate, *(layer.material for layer in stack.layers)]
    if stack.exit is not None:
        materials.append(stack.exit)
    for material in materials:
        if material.valid_range_nm is not None:
            lo, hi = max(lo, material.valid_range_nm[0]), min(hi, material.valid_range_nm[1])
    return lo, hi


def plot_requests(stack, target: Target) -> list[tuple[Request, list[Band]]]:
    """One plot panel per (quantity, polarization, angle): bands padded by 10 % of their span."""
    valid_lo, valid_hi = _valid_span_nm(stack)
    panels: dict[tuple, list[Band]] = {}
    for band in target.bands:
        panels.setdefault((band.quantity, band.polarization, band.angle_deg), []).append(band)
    out = []
    for (quantity, polarization, angle), bands in panels.items():
        lo = min(b.wavelength_nm[0] for b in bands)
        hi = max(b.wavelength_nm[1] for b in bands)
        pad = max(0.1 * (hi - lo), 10.0)
        lo, hi = max(lo - pad, valid_lo, 1.0), min(hi + pad, valid_hi)
        grid = np.linspace(lo, hi, int(min(max(hi - lo, 1.0), 1000)) + 1)
        key = f"plot:{quantity}:{polarization}:{angle:g}"
        out.append((Request(key, quantity, polarization, angle, grid), bands))
    return out


def check_recipe(recipe_path, target_path, measured=(), tolerances=None, trials: int | None = None,
                 seed: int | None = 0) -> tuple[dict, dict]:
    """The whole check behind `lamina check`: (check.json content, data for the plots)."""
    from .. import __version__
    from ..stack.modelfile import load_model
    from .sensitivity import thickness_sensitivity
    from .yield_mc import DEFAULT_TRIALS, draw_errors, envelope, run_yield

    stack = load_model(recipe_path)
    target = load_target(target_path)
    tol = resolve_tolerances(target, tolerances)
    names = [layer.name for layer in stack.layers]
    if not names:
        raise LaminaInputError("the recipe has no layers", str(recipe_path), "a coating with at least one layer")
    if tol is not None:
        tol.check_layers(names)
    evaluator = RecipeEvaluator(stack, band_requests(target))
    design, _ = design_report(evaluator, target)
    report: dict = {"design": design, "sensitivity": thickness_sensitivity(evaluator, target, tol)}
    notes = []
    panels = plot_requests(stack, target)
    plot_eval = RecipeEvaluator(stack, [request for request, _ in panels]) if panels else None
    plot = {"panels": [], "sensitivity": report["sensitivity"]}
    curves = {key: values[0] for key, values in plot_eval.spectra().items()} if plot_eval else {}
    bounds = {}
    if tol is not None:
        n_trials = DEFAULT_TRIALS if trials is None else int(trials)
        report["yield"] = run_yield(evaluator, target, tol, trials=n_trials, seed=seed)
        if plot_eval is not None and not tol.is_zero():
            draws = draw_errors(tol, names, evaluator.nominal_nm, min(n_trials, ENVELOPE_TRIALS), seed)
            bounds = envelope(plot_eval, draws)
    elif trials is not None:
        notes.append("--trials given but no tolerances: the Monte Carlo yield did not run")
    data, fitted_curves = None, {}
    if measured:
        from ..data.readers import read_data

        data = read_data(list(measured))
        source = ", ".join(str(m) for m in measured)
        report["measured"], fitted_stack = measured_report(stack, data, target, source)
        report["measured"]["files"] = [str(m) for m in measured]
        if plot_eval is not None and fitted_stack is not None:
            fitted_eval = RecipeEvaluator(fitted_stack, [request for request, _ in panels])
            fitted_curves = {key: values[0] for key, values in fitted_eval.spectra().items()}
    for request, bands in panels:
        plot["panels"].append({
            "quantity": request.quantity, "polarization": request.polarization, "angle_deg": request.angle_deg,
            "wavelength_nm": request.wavelength_nm, "design": curves[request.key], "bands": bands,
            "envelope": bounds.get(request.key),
            "measured": measured_curve(data, request.quantity, request.polarization, request.angle_deg)
            if data is not None else None,
            "fitted": fitted_curves.get(request.key),
        })
    passing = design["pass"]
    if "yield" in report and "pass" in report["yield"]:
        passing = passing and report["yield"]["pass"]
    if "measured" in report:
        passing = passing and report["measured"]["pass"]
    report["pass"] = bool(passing)
    report["notes"] = notes
    report["provenance"] = _provenance(recipe_path, target_path, tolerances, measured, __version__)
    return report, plot


def _provenance(recipe, target, tolerances, measured, version) -> dict:
    import datetime
    import hashlib

    files = [recipe, target] + ([tolerances] if tolerances else []) + list(measured)
    digests = {str(f): hashlib.sha256(Path(f).read_bytes()).hexdigest() for f in files}
    return {"lamina": version, "recipe": str(recipe), "target": str(target),
            "tolerances": str(tolerances) if tolerances else None, "measured": [str(m) for m in measured],
            "sha256": digests, "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")}
