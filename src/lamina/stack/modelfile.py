"""Model files: a layer stack in TOML (our own schema; reference in docs/model-file.md).

``load_model(path)`` reads and validates a model file into a `Stack`;
``save_model(stack, path)`` / ``stack_to_toml(stack)`` write one back.  Every
problem in a model file is a `LaminaInputError` whose location reads
``<file>: <key path>`` (``model.toml: layers[2].material.eps_inf``) or, for TOML
syntax errors, ``<file>:<line>:<column>``.

Key paths in messages use 1-based ``[i]`` indices for arrays of tables; the
parameter names used everywhere else (results, specs, the command line) are the
dotted form of the same path (``film.material.oscillators.1.center_ev``).
"""
from __future__ import annotations

import datetime as _dt
import json
import math
import os
import re
import tomllib
from pathlib import Path
from typing import Mapping

from ..dispersion.base import Dispersion
from ..errors import LaminaInputError
from ..parameters import Param, as_param
from .layers import LAYER_NAME, RESERVED_NAMES, THICKNESS_SPEC, Layer, Stack

TOP_LEVEL_KEYS = ("name", "ambient", "layers", "substrate", "exit", "samples", "instrument")
LAYER_KEYS = ("name", "thickness_nm", "material", "coherent")
MEDIUM_KEYS = {"ambient": ("material",), "substrate": ("material", "thickness_mm"), "exit": ("material",)}
INSTRUMENT_KEYS = ("bandwidth_nm", "angle_spread_deg", "thickness_nonuniformity_pct")

#: private key of Stack.extras: the folder of the model file (never written to a file)
MODEL_DIR_KEY = "_model_dir"

#: media a model file may name without the material library (so that a model
#: with inline laws works even where the library is unavailable)
_BUILTIN_MEDIA = {"air": "n = 1 (vacuum; air differs by ~3e-4)", "vacuum": "n = 1", "void": "n = 1 (empty space)"}


# ---------------------------------------------------------------------------
# material resolution
# ---------------------------------------------------------------------------

class MaterialResolver:
    """Turns a model-file material value into a law: a name -> the library, a table -> a law.

    Passed to ``lamina.dispersion.from_toml`` as ``resolve`` so that laws made
    of other materials (effective-medium mixtures) can resolve their
    components; ``base_dir`` is the model file's folder, where the ``table`` law
    looks for its data file.
    """

    def __init__(self, base_dir: str | os.PathLike | None = None):
        self.base_dir = Path(base_dir) if base_dir is not None else Path.cwd()

    def __call__(self, raw, where: str) -> Dispersion:
        if isinstance(raw, str):
            return library_material(raw, where)
        if isinstance(raw, Mapping):
            from .. import dispersion
            return dispersion.from_toml(raw, where, self)
        raise LaminaInputError(f"{_short(raw)} is not a material", where,
                               'a library name (material = "Si") or an inline law table with a \'law\' key')


def _library():
    """The material library module, or None while it is unavailable."""
    try:
        from .. import materials
    except ImportError:  # pragma: no cover - the package always ships it
        return None
    return materials if hasattr(materials, "get") else None


def library_names() -> list[str]:
    lib = _library()
    names = set(_BUILTIN_MEDIA)
    if lib is not None and hasattr(lib, "names"):
        names.update(lib.names())
    return sorted(names, key=str.lower)


def library_material(name: str, where: str) -> Dispersion:
    """A material of the library by name, with a message listing the names when unknown."""
    lib = _library()
    library_error: LaminaInputError | None = None
    if lib is not None:
        try:
            return lib.get(name)
        except LaminaInputError as exc:
            library_error = exc
        except KeyError:
            pass
    if name.lower() in _BUILTIN_MEDIA:
        from ..dispersion.constant import Constant
        return Constant(1.0, 0.0, name=name.lower(), source=_BUILTIN_MEDIA[name.lower()])
    if library_error is not None:  # the library's own message (it suggests close names), placed here
        expected = f"{library_error.expected}, or an inline law table" if library_error.expected else None
        raise LaminaInputError(library_error.problem, where, expected, hint=library_error.hint)
    names = library_names()
    shown = ", ".join(names[:40]) + (", ..." if len(names) > 40 else "")
    raise LaminaInputError(f"unknown material '{name}'", where,
                           f"a library name ({shown}; see 'lamina materials') or an inline law table")


# ---------------------------------------------------------------------------
# loading
# ---------------------------------------------------------------------------

def load_model(path: str | os.PathLike) -> Stack:
    """Read a TOML model file into a `Stack` (see docs/model-file.md)."""
    path = Path(path)
    label = str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise LaminaInputError("file not found", label, "an existing model file (.toml)") from None
    except IsADirectoryError:
        raise LaminaInputError("is a folder", label, "a model file (.toml)") from None
    except UnicodeDecodeError as exc:
        raise LaminaInputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", label,
                               "a UTF-8 TOML model file") from None
    return model_from_text(text, label=label, base_dir=path.parent)


def model_from_text(text: str, label: str = "<model>", base_dir: str | os.PathLike | None = None) -> Stack:
    """Parse model-file text; `label` names the source in messages, `base_dir` anchors relative paths."""
    table = parse_toml(text, label)
    try:
        stack = stack_from_table(table, MaterialResolver(base_dir))
    except LaminaInputError as exc:
        raise _prefixed(exc, label) from None
    # where relative data-file paths (law = "table") start; save_model re-bases them
    stack.extras[MODEL_DIR_KEY] = str(Path(base_dir).resolve()) if base_dir is not None else str(Path.cwd())
    return stack


def parse_toml(text: str, label: str) -> dict:
    """tomllib.loads with a LaminaInputError naming the line and column of a syntax error."""
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        match = re.search(r"\(at line (\d+), column (\d+)\)", message)
        problem = re.sub(r"\s*\(at line \d+, column \d+\)", "", message) or "syntax error"
        where = f"{label}:{match.group(1)}:{match.group(2)}" if match else label
        if not match and "end of document" in message:
            # the parser ran off the end: point at the last line with content
            where = f"{label}:{max(1, len(text.rstrip().splitlines()))}"
        raise LaminaInputError(f"invalid TOML: {problem}", where, "TOML syntax (https://toml.io)") from None


def _prefixed(exc: LaminaInputError, label: str) -> LaminaInputError:
    """The same error with the file name in front of its key path."""
    where = f"{label}: {exc.where}" if exc.where else label
    return LaminaInputError(exc.problem, where, exc.expected, hint=exc.hint)


def stack_from_table(table: Mapping, resolve: MaterialResolver | None = None) -> Stack:
    """Build a Stack from a parsed model-file table (key paths in errors have no file name)."""
    resolve = resolve or MaterialResolver()
    _check_keys(table, TOP_LEVEL_KEYS, "", "a top-level section")
    name = table.get("name", "")
    if not isinstance(name, str):
        raise LaminaInputError(f"{_short(name)} is not a string", "name", 'a string, e.g. name = "oxide on Si"')
    ambient = _medium(table, "ambient", resolve, required=False)
    layers = _layers(table.get("layers", []), resolve)
    if "substrate" not in table:
        raise LaminaInputError("missing section [substrate]", "substrate", '[substrate] with material = "..."')
    substrate = _medium(table, "substrate", resolve, required=True)
    thickness_mm = _substrate_thickness(table["substrate"])
    exit_medium = _medium(table, "exit", resolve, required=False)
    if exit_medium is not None and thickness_mm is None:
        raise LaminaInputError("[exit] needs a substrate of finite thickness", "exit",
                               "substrate.thickness_mm (the light leaves the slab into [exit])")
    extras = {}
    if "samples" in table:
        extras["samples"] = _samples(table["samples"])
    if "instrument" in table:
        extras["instrument"] = _instrument(table["instrument"])
    return Stack(layers=layers, substrate=substrate, ambient=ambient, substrate_thickness_mm=thickness_mm,
                 exit=exit_medium, name=name, extras=extras)


def _check_keys(table: Mapping, allowed, where: str, what: str) -> None:
    for key in table:
        if key not in allowed:
            path = f"{where}.{key}" if where else key
            raise LaminaInputError(f"unknown key '{key}'", path, f"{what}: one of " + ", ".join(allowed))


def _require_table(raw, where: str, example: str) -> Mapping:
    if not isinstance(raw, Mapping):
        raise LaminaInputError(f"{_short(raw)} is not a table", where, example)
    return raw


def _medium(table: Mapping, key: str, resolve: MaterialResolver, required: bool) -> Dispersion | None:
    if key not in table:
        return None
    section = _require_table(table[key], key, f'a section [{key}] with material = "..."')
    _check_keys(section, MEDIUM_KEYS[key], key, f"a key of [{key}]")
    if "material" not in section:
        raise LaminaInputError("missing key 'material'", key, 'material = "<library name>" or an inline law table')
    return resolve(section["material"], f"{key}.material")


def _substrate_thickness(section: Mapping) -> float | None:
    if "thickness_mm" not in section:
        return None
    value = section["thickness_mm"]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise LaminaInputError(f"thickness_mm = {_short(value)} is not a positive number", "substrate.thickness_mm",
                               "a positive number of millimetres (a thick, incoherent substrate)")
    return float(value)


def _layers(raw, resolve: MaterialResolver) -> list[Layer]:
    if not isinstance(raw, list):
        raise LaminaInputError(f"{_short(raw)} is not an array of tables", "layers",
                               "[[layers]] sections, top (ambient side) to bottom")
    layers: list[Layer] = []
    first_seen: dict[str, int] = {}
    for index, entry in enumerate(raw, start=1):
        where = f"layers[{index}]"
        entry = _require_table(entry, where, "a [[layers]] table with name, thickness_nm, material")
        _check_keys(entry, LAYER_KEYS, where, "a key of [[layers]]")
        name = _layer_name(entry, where)
        if name in first_seen:
            raise LaminaInputError(f"duplicate layer name '{name}' (also layers[{first_seen[name]}])",
                                   f"{where}.name", "a name unique in the model")
        first_seen[name] = index
        if "thickness_nm" not in entry:
            raise LaminaInputError("missing key 'thickness_nm'", where, "thickness_nm = <number> or a table {value, min, max}")
        thickness = as_param(entry["thickness_nm"], THICKNESS_SPEC, f"{where}.thickness_nm")
        if "material" not in entry:
            raise LaminaInputError("missing key 'material'", where, 'material = "<library name>" or [layers.material]')
        material = resolve(entry["material"], f"{where}.material")
        coherent = entry.get("coherent", True)
        if not isinstance(coherent, bool):
            raise LaminaInputError(f"coherent = {_short(coherent)} is not true/false", f"{where}.coherent",
                                   "true (thin film) or false (thick incoherent layer)")
        layers.append(Layer(name=name, material=material, thickness_nm=thickness, coherent=coherent))
    return layers


def _layer_name(entry: Mapping, where: str) -> str:
    if "name" not in entry:
        raise LaminaInputError("missing key 'name'", where, 'name = "<identifier>", e.g. name = "oxide"')
    name = entry["name"]
    if not isinstance(name, str) or not LAYER_NAME.match(name):
        raise LaminaInputError(f"layer name {_short(name)} is not allowed", f"{where}.name",
                               "letters, digits, _ and -, starting with a letter")
    if name in RESERVED_NAMES:
        raise LaminaInputError(f"layer name '{name}' is reserved", f"{where}.name",
                               "a name other than " + ", ".join(sorted(RESERVED_NAMES)))
    return name


def _samples(raw) -> list:
    if not isinstance(raw, list) or not all(isinstance(item, Mapping) for item in raw):
        raise LaminaInputError(f"{_short(raw)} is not an array of tables", "samples",
                               "[[samples]] tables (see the fitting documentation)")
    return [dict(item) for item in raw]


def _instrument(raw) -> dict:
    section = _require_table(raw, "instrument", "a section [instrument]")
    _check_keys(section, INSTRUMENT_KEYS, "instrument", "a key of [instrument]")
    out = {}
    for key, value in section.items():
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value < 0:
            raise LaminaInputError(f"{key} = {_short(value)} is not a non-negative number", f"instrument.{key}",
                                   "a number >= 0 (0 switches the effect off)")
        out[key] = float(value)
    return out


def _short(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


# ---------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------

def material_to_toml(material: Dispersion):
    """A library name when `material` is an unchanged library material, else its inline law table."""
    if material.name:
        try:
            reference = library_material(material.name, "material")
        except LaminaInputError:
            reference = None
        if reference is not None and _same_law(reference, material):
            return material.name
    return material.to_toml()


def _same_law(a: Dispersion, b: Dispersion) -> bool:
    if type(a) is not type(b) or a.params.keys() != b.params.keys():
        return False
    return all(_same_param(a.params[k], b.params[k]) for k in a.params)


def _same_param(a: Param, b: Param) -> bool:
    return (a.value == b.value and a.min == b.min and a.max == b.max and a.vary == b.vary
            and a.expr == b.expr)


def stack_to_table(stack: Stack) -> dict:
    """The model-file table of a stack (inverse of `stack_from_table`)."""
    table: dict = {}
    if stack.name:
        table["name"] = stack.name
    if "instrument" in stack.extras:
        table["instrument"] = dict(stack.extras["instrument"])
    table["ambient"] = {"material": material_to_toml(stack.ambient)}
    table["layers"] = [_layer_table(layer) for layer in stack.layers]
    substrate: dict = {"material": material_to_toml(stack.substrate)}
    if stack.substrate_thickness_mm is not None:
        substrate["thickness_mm"] = float(stack.substrate_thickness_mm)
    table["substrate"] = substrate
    if stack.exit is not None:
        table["exit"] = {"material": material_to_toml(stack.exit)}
    if "samples" in stack.extras:
        table["samples"] = list(stack.extras["samples"])
    return table


def _layer_table(layer: Layer) -> dict:
    entry: dict = {"name": layer.name, "thickness_nm": layer.thickness_nm.to_toml()}
    if not layer.coherent:
        entry["coherent"] = False
    entry["material"] = material_to_toml(layer.material)
    return entry


def stack_to_toml(stack: Stack, destination_dir: str | os.PathLike | None = None) -> str:
    """Model-file text of a stack; `load_model` of this text gives the same stack.

    With `destination_dir`, relative data-file paths (``law = "table"``) are
    rewritten relative to that folder so the written file finds them.
    """
    header = "# lamina model file (see docs/model-file.md)\n"
    table = stack_to_table(stack)
    source_dir = stack.extras.get(MODEL_DIR_KEY)
    if destination_dir is not None and source_dir is not None:
        _rebase_files(table, Path(source_dir), Path(destination_dir).resolve())
    return header + dumps_toml(table)


def _rebase_files(node, source_dir: Path, destination_dir: Path) -> None:
    """Rewrite relative ``file`` entries of table laws from `source_dir` to `destination_dir`."""
    if isinstance(node, Mapping):
        file = node.get("file")
        if node.get("law") == "table" and isinstance(file, str) and not Path(file).is_absolute():
            target = (source_dir / file).resolve()
            try:
                node["file"] = Path(os.path.relpath(target, destination_dir)).as_posix()
            except ValueError:  # another drive (Windows): keep it absolute
                node["file"] = str(target)
        for value in node.values():
            _rebase_files(value, source_dir, destination_dir)
    elif isinstance(node, list):
        for value in node:
            _rebase_files(value, source_dir, destination_dir)


def save_model(stack: Stack, path: str | os.PathLike) -> Path:
    """Write `stack` as a model file, atomically (a temporary file, then rename)."""
    from ..data.writers import atomic_write_text
    path = Path(path)
    return atomic_write_text(path, stack_to_toml(stack, path.parent if str(path.parent) else Path(".")))


# ---------------------------------------------------------------------------
# a small TOML writer: readable output (parameters as inline tables)
# ---------------------------------------------------------------------------

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def dumps_toml(table: Mapping) -> str:
    """TOML text for a table: scalars and small tables inline, sections for the rest."""
    lines: list[str] = []
    _emit_table(table, [], lines, header=None)
    return "\n".join(lines).strip("\n") + "\n"


def _emit_table(table: Mapping, path: list[str], lines: list[str], header: str | None) -> None:
    simple = [(k, v) for k, v in table.items() if _is_inline(v)]
    nested = [(k, v) for k, v in table.items() if not _is_inline(v)]
    if header is not None:
        lines.append("")
        lines.append(header)
    for key, value in simple:
        lines.append(f"{_key(key)} = {_inline(value)}")
    for key, value in nested:
        sub_path = path + [_key(key)]
        dotted = ".".join(sub_path)
        if isinstance(value, Mapping):
            _emit_table(value, sub_path, lines, f"[{dotted}]")
        else:  # a list of tables
            for item in value:
                _emit_table(item, sub_path, lines, f"[[{dotted}]]")


def _is_inline(value) -> bool:
    """Scalars, arrays of scalars and flat small tables (a parameter) go on one line."""
    if isinstance(value, Mapping):
        return all(not isinstance(v, (Mapping, list)) for v in value.values()) and len(value) <= 6 and bool(value)
    if isinstance(value, list):
        return not value or not all(isinstance(v, Mapping) for v in value)
    return True


def _key(key: str) -> str:
    return key if _BARE_KEY.match(key) else _string(key)


def _string(text: str) -> str:
    """A TOML basic string: JSON escapes, plus DEL, which TOML forbids raw and JSON leaves alone."""
    return json.dumps(text, ensure_ascii=False).replace("\x7f", "\\u007f")


def _inline(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return _string(value)
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time)):
        return value.isoformat()
    if isinstance(value, Mapping):
        return "{ " + ", ".join(f"{_key(k)} = {_inline(v)}" for k, v in value.items()) + " }" if value else "{}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_inline(v) for v in value) + "]"
    if hasattr(value, "item"):  # numpy scalars
        return _inline(value.item())
    raise TypeError(f"cannot write {type(value).__name__} to TOML")
