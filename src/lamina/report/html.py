"""Self-contained HTML reports built from the files of an output folder.

`write_report(outdir)` reads whatever job outputs the folder holds --
``result.json`` (a fit), ``summary.json`` + ``sites.csv`` (a wafer map),
``check.json`` (a coating recipe check) -- and writes ``outdir/report.html``:
the verdict first, then parameters with uncertainties, statistics, warnings,
the PNG/SVG plots found in the folder (embedded as base64 data URIs, so the
file opens offline), the model files as text, and the provenance.

The report is a pure function of the folder, so ``lamina report OUTDIR``
rebuilds it at any time.  Every string from the folder is user data and is
escaped by jinja2's autoescape; the template carries no script at all.

Reading is tolerant: optional keys may be missing, plots may be absent, and a
value of an unexpected shape is shown as it is rather than crashing the
command that produced the folder.  Only an unreadable job file (broken JSON,
not an object) is an input error.
"""
from __future__ import annotations

import base64
import csv
import datetime as _dt
import functools
import json
import math
import os
from pathlib import Path
from typing import Any, Iterable

from ..errors import LaminaInputError

REPORT_NAME = "report.html"
#: job kind -> the file that marks it, in the order the report shows them
JOB_FILES = {"fit": "result.json", "map": "summary.json", "check": "check.json"}
JOB_TITLES = {"fit": "Fit", "map": "Wafer map", "check": "Coating recipe check"}
#: plots larger than this are listed, not embedded (keeps the report openable)
MAX_EMBED_BYTES = 8_000_000
#: text files (models) larger than this are cut
MAX_TEXT_CHARS = 200_000
#: sites listed in full at most (a 400-site map is fine; a 10 000-site map is cut)
MAX_SITE_ROWS = 2000
#: reduced chi-square outside this range is called out (the fit engine warns at the same limits)
CHI2_LOW, CHI2_HIGH = 0.3, 3.0
CAUTION = ("Results are model-dependent: they are only as good as the optical model and its "
           "assumptions. Verify against traceable reference samples before relying on them. "
           "Dispositions (scrap, rework, ship, release) follow local procedures and are decided "
           "by qualified staff.")

QUANTITY_UNITS = {"psi": "deg", "delta": "deg", "R": "", "T": "", "A": "", "Rs": "", "Rp": "",
                  "Ts": "", "Tp": ""}
STAT_ORDER = ["mean", "std", "min", "max", "range", "nonuniformity_pct", "std_over_mean_pct", "n_sites"]
COUNT_LABELS = {"n_sites": "sites", "n_in_zone": "inside the edge exclusion", "n_failed": "not fitted",
                "n_failed_in_zone": "not fitted inside the edge exclusion", "n_fitted": "fitted"}
STAT_LABELS = {"mean": "mean", "std": "std", "min": "min", "max": "max", "range": "range",
               "nonuniformity_pct": "non-uniformity %", "std_over_mean_pct": "std/mean %",
               "n_sites": "sites"}


# -- public API ---------------------------------------------------------------
def find_jobs(outdir: str | os.PathLike) -> dict[str, Path]:
    """Job kind -> job file for each job output present in `outdir`."""
    folder = Path(outdir)
    return {kind: folder / name for kind, name in JOB_FILES.items() if (folder / name).is_file()}


def build_context(outdir: str | os.PathLike) -> dict:
    """Everything the template needs, read from the files in `outdir`."""
    folder = Path(outdir)
    if not folder.is_dir():
        problem = "is a file, not a folder" if folder.exists() else "no such folder"
        raise LaminaInputError(problem, str(folder), "an output folder written by lamina fit, map or check")
    jobs = find_jobs(folder)
    if not jobs:
        raise LaminaInputError(
            "holds no lamina output", str(folder),
            "one of " + ", ".join(JOB_FILES.values()) + " (written by lamina fit, map or check)",
            hint="run 'lamina fit', 'lamina map' or 'lamina check' with -o OUTDIR first")
    sections = []
    for kind, path in jobs.items():
        raw = load_json(path)
        builder = {"fit": fit_section, "map": map_section, "check": check_section}[kind]
        sections.append(builder(raw, folder))
    from .. import __version__
    return {
        "title": f"lamina report: {', '.join(s['title'] for s in sections)}",
        "folder": folder.resolve().name,
        "sections": sections,
        "overall": _overall(sections),
        "plots": collect_plots(folder),
        "texts": _unique_texts(collect_texts(folder) + [m for s in sections for m in s["provenance"]["models"]]),
        "built_with": __version__,
        "built_at": _now_utc(),
        "caution": CAUTION,
    }


def render_report(outdir: str | os.PathLike) -> str:
    """The report as an HTML string."""
    context = build_context(outdir)
    return _environment().get_template("report.html.j2").render(**context)


def write_report(outdir: str | os.PathLike) -> Path:
    """Build ``outdir/report.html`` from the folder's files (atomically); return its path."""
    html = render_report(outdir)
    from ..data.writers import atomic_write_text  # temporary file in the same folder, then os.replace
    return atomic_write_text(Path(outdir) / REPORT_NAME, html)


# -- reading ------------------------------------------------------------------
def load_json(path: Path) -> dict:
    """A job file as a dict; broken JSON is an input error naming line and column."""
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise LaminaInputError(f"cannot read ({exc})", str(path), "a readable UTF-8 JSON file") from None
    try:
        raw = json.loads(text)
    except json.JSONDecodeError as exc:
        raise LaminaInputError(f"invalid JSON ({exc.msg})", f"{path}:{exc.lineno}:{exc.colno}",
                               "the JSON written by lamina") from None
    if not isinstance(raw, dict):
        raise LaminaInputError("top level is not a JSON object", str(path), "a JSON object {...}")
    return raw


def read_sites(path: Path) -> tuple[list[str], list[dict]]:
    """Columns and rows of a sites.csv (empty when absent or unreadable)."""
    if not path.is_file():
        return [], []
    try:
        with path.open(newline="", encoding="utf-8") as handle:
            reader = csv.DictReader(line for line in handle if not line.startswith("#"))
            rows = list(reader)
            return list(reader.fieldnames or []), rows
    except (OSError, UnicodeDecodeError, csv.Error):
        return [], []


def collect_plots(folder: Path) -> list[dict]:
    """PNG and SVG files of the folder as data URIs (SVG inside <img> runs no script)."""
    plots = []
    for path in sorted(folder.iterdir(), key=_plot_order):
        suffix = path.suffix.lower()
        if suffix not in (".png", ".svg") or not path.is_file():
            continue
        mime = "image/png" if suffix == ".png" else "image/svg+xml"
        entry = {"name": path.name, "caption": _caption(path.stem), "uri": None, "note": ""}
        try:
            size = path.stat().st_size
            if size > MAX_EMBED_BYTES:
                entry["note"] = f"not embedded: {size / 1e6:.1f} MB (see the file next to this report)"
            else:
                entry["uri"] = f"data:{mime};base64," + base64.b64encode(path.read_bytes()).decode("ascii")
        except OSError as exc:
            entry["note"] = f"could not be read ({exc.strerror or exc})"
        plots.append(entry)
    return plots


def collect_texts(folder: Path) -> list[dict]:
    """Model files (TOML) of the folder as text; fitted.toml first."""
    paths = sorted(folder.glob("*.toml"), key=lambda p: (p.name != "fitted.toml", p.name))
    texts = []
    for path in paths:
        try:
            text = path.read_text(encoding="utf-8", errors="replace")
        except OSError:
            continue
        cut = len(text) > MAX_TEXT_CHARS
        texts.append({"name": path.name, "text": text[:MAX_TEXT_CHARS], "cut": cut, "note": "in the output folder"})
    return texts


def _unique_texts(texts: list[dict]) -> list[dict]:
    seen, out = set(), []
    for entry in texts:
        if entry["name"] not in seen:
            seen.add(entry["name"])
            out.append(entry)
    return out


# -- fit ----------------------------------------------------------------------
def fit_section(result: dict, folder: Path) -> dict:
    """Template data for a fit (result.json)."""
    stats = _dict(result.get("statistics"))
    warnings = [str(w) for w in _list(result.get("warnings"))]
    converged = result.get("converged")
    reduced = _float(stats.get("reduced_chi2"))
    reasons = []
    chi2_off = reduced is not None and not (CHI2_LOW <= reduced <= CHI2_HIGH)
    if converged is True:
        status = "warn" if warnings or chi2_off else "pass"
        headline = "Fit converged" + (f" with {len(warnings)} warning{'s' if len(warnings) != 1 else ''}"
                                      if warnings else "")
    elif converged is False:
        status, headline = "fail", "Fit did not converge"
    else:
        status, headline = "warn", "Fit status unknown (no 'converged' in result.json)"
    if result.get("message"):
        reasons.append(str(result["message"]))
    if reduced is not None:
        reasons.append(f"reduced chi-square {fmt(reduced, 4)} ({_chi2_reading(reduced)})")
    parameters = _fit_parameters(_dict(result.get("parameters")))
    return {
        "kind": "fit", "title": JOB_TITLES["fit"], "source": JOB_FILES["fit"],
        "status": status, "headline": headline, "reasons": reasons, "warnings": warnings,
        "parameters": parameters,
        "statistics": _fit_statistics(stats),
        "correlations": _correlations(_dict(result.get("correlations")), parameters),
        "provenance": _provenance(result, folder / JOB_FILES["fit"]),
        "extra": _extra(result, {"converged", "message", "statistics", "parameters", "correlations",
                                 "warnings", "provenance"}),
    }


def _fit_parameters(raw: dict) -> list[dict]:
    rows = []
    for name, entry in raw.items():
        entry = entry if isinstance(entry, dict) else {"value": entry}
        value, stderr = _float(entry.get("value")), _float(entry.get("stderr"))
        unit = str(entry.get("unit") or "")
        ci = _list(entry.get("ci90"))
        flags = []
        if entry.get("at_bound"):
            flags.append("at bound")
        if entry.get("vary") is False:
            flags.append("tied" if entry.get("expr") or stderr is not None else "fixed")
        if entry.get("expr"):
            flags.append(f"= {entry['expr']}")
        rows.append({
            "name": str(name), "unit": unit,
            "value": fmt_pm(value, stderr),
            "ci90": (f"{fmt_like(_float(ci[0]), stderr)} .. {fmt_like(_float(ci[1]), stderr)}"
                     if len(ci) == 2 else "—"),
            "bounds": f"{fmt(_float(entry.get('min')))} .. {fmt(_float(entry.get('max')))}",
            "flags": flags, "alert": bool(entry.get("at_bound")),
            "free": entry.get("vary") is not False,
        })
    return rows


def _fit_statistics(stats: dict) -> list[tuple[str, str]]:
    rows = []
    labels = [("chi2", "chi-square"), ("reduced_chi2", "reduced chi-square"),
              ("n_points", "data points"), ("n_free", "free parameters")]
    for key, label in labels:
        if key in stats:
            rows.append((label, fmt(_float(stats[key]), 5) if key.endswith("chi2") else _plain(stats[key])))
    for quantity, value in _dict(stats.get("rms")).items():
        unit = QUANTITY_UNITS.get(str(quantity), "")
        rows.append((f"rms residual {quantity}", f"{fmt(_float(value), 3)}{(' ' + unit) if unit else ''}"))
    for key, value in stats.items():
        if key not in {"chi2", "reduced_chi2", "n_points", "n_free", "rms"}:
            rows.append((str(key), _plain(value)))
    return rows


def _correlations(raw: dict, parameters: list[dict]) -> dict | None:
    names = [p["name"] for p in parameters if p["free"]]
    names += [n for n in raw if n not in names]
    if len(names) < 2 or not raw:
        return None
    matrix = []
    for a in names:
        row = []
        for b in names:
            r = 1.0 if a == b else _float(_dict(raw.get(a)).get(b))
            if r is None:
                r = _float(_dict(raw.get(b)).get(a))
            row.append({"text": "—" if r is None else f"{r:+.2f}",
                        "strong": r is not None and a != b and abs(r) > 0.95,
                        "level": 0 if r is None else min(4, int(abs(r) * 5))})
        matrix.append({"name": a, "cells": row})
    return {"names": names, "rows": matrix}


def _chi2_reading(reduced: float) -> str:
    # The same limits as the fit engine's warning (docs/fitting.md).
    if reduced > CHI2_HIGH:
        return "well above 1: the model misses features of the data, or the stated uncertainties are too small"
    if reduced < CHI2_LOW:
        return "well below 1: the stated uncertainties are probably too large"
    return "close to 1: the model describes the data to within the stated uncertainties"


# -- map ----------------------------------------------------------------------
def map_section(summary: dict, folder: Path) -> dict:
    """Template data for a wafer map (summary.json + sites.csv)."""
    wafers = _map_wafers(summary)
    columns, rows = read_sites(folder / "sites.csv")
    failed_rows = [r for r in rows if _site_failed(r)]
    out_of_spec = [r for r in rows if not _site_failed(r) and _falsy(r.get("pass"))]
    failed_count = _first_int(summary, ("failed_sites", "n_failed", "failed", "sites_failed"))
    if failed_count is None and rows:
        failed_count = len(failed_rows)
    wafer_fail = [w for w in wafers if w["pass"] is False]
    verdict = summary.get("pass")
    if verdict is None and wafers and all(w["pass"] is not None for w in wafers):
        verdict = not wafer_fail
    if failed_count:
        status = "fail"
    elif verdict is True:
        status = "pass"
    elif verdict is False:
        status = "fail"
    else:
        status = "warn"
    headline = {"pass": "Map passes", "fail": "Map fails", "warn": "Map judged without a spec"}[status]
    reasons = []
    if failed_count:
        reasons.append(f"{failed_count} site{'s' if failed_count != 1 else ''} could not be fitted")
    for wafer in wafer_fail:
        reasons += [f"wafer {wafer['name']}: {r}" for r in wafer["reasons"]] or [f"wafer {wafer['name']} fails"]
    for reason in _list(summary.get("reasons")):
        reasons.append(str(reason))
    if verdict is True and not failed_count:
        reasons.append(f"all {len(wafers)} wafer{'s' if len(wafers) != 1 else ''} within spec")
    site_columns = [c for c in columns if c != "reason"] + (["reason"] if "reason" in columns else [])
    return {
        "kind": "map", "title": JOB_TITLES["map"], "source": JOB_FILES["map"],
        "status": status, "headline": headline, "reasons": reasons,
        "warnings": [str(w) for w in _list(summary.get("warnings"))],
        "wafers": wafers, "stat_columns": _stat_columns(wafers),
        "counts": _map_counts(summary, rows, failed_count),
        "failed_sites": [_site_row(r, columns) for r in failed_rows],
        "out_of_spec_sites": [_site_row(r, columns) for r in out_of_spec],
        "site_columns": site_columns,
        "sites": [[_cell(r.get(c)) for c in site_columns] for r in rows[:MAX_SITE_ROWS]],
        "sites_cut": max(0, len(rows) - MAX_SITE_ROWS),
        "spec": _spec_rows(summary.get("spec")),
        "provenance": _provenance(summary, folder / JOB_FILES["map"]),
        "extra": _extra(summary, {"wafers", "pass", "reasons", "warnings", "provenance", "spec", "failed_sites",
                                  "n_failed", "failed", "sites_failed", "n_sites", "sites", "parameters",
                                  "statistics", "wafer", "inputs", "n_fitted", "n_wafers", "exit_code"}),
    }


def _map_wafers(summary: dict) -> list[dict]:
    """Per-wafer entries, whatever the shape: {name: {...}}, [{wafer: name, ...}], or the top level."""
    raw = summary.get("wafers")
    items: list[tuple[str, dict]] = []
    if isinstance(raw, dict):
        items = [(str(k), v) for k, v in raw.items() if isinstance(v, dict)]
    elif isinstance(raw, list):
        items = [(str(v.get("wafer", v.get("name", i + 1))), v) for i, v in enumerate(raw) if isinstance(v, dict)]
    if not items:
        items = [(str(summary.get("wafer", "wafer")), summary)]
    wafers = []
    for name, entry in items:
        stats = entry.get("parameters", entry.get("statistics", {}))
        wafers.append({
            "name": name,
            "pass": entry.get("pass") if isinstance(entry.get("pass"), bool) else None,
            "reasons": [str(r) for r in _list(entry.get("reasons"))],
            "stats": {str(k): {sk: (fmt(sv, 5) if isinstance(sv, float) else _plain(sv)) for sk, sv in v.items()}
                      for k, v in _dict(stats).items() if isinstance(v, dict)},
            "counts": [(COUNT_LABELS.get(str(k), str(k)), _plain(v)) for k, v in entry.items()
                       if str(k).startswith("n_") and not isinstance(v, (dict, list))],
        })
    return wafers


def _spec_rows(raw: Any) -> dict | None:
    """Spec limits as rows (parameter, lower, upper, uniformity); other fields as text."""
    if not isinstance(raw, dict):
        return None
    limits, uniformity = _dict(raw.get("limits")), _dict(raw.get("uniformity"))
    rows = []
    for name in list(limits) + [n for n in uniformity if n not in limits]:
        lim = _dict(limits.get(name))
        uni = uniformity.get(name)
        uni_text = ", ".join(f"{k.replace('_', ' ')} {_plain(v)}" for k, v in uni.items()) \
            if isinstance(uni, dict) else _plain(uni) if uni is not None else "—"
        rows.append({"name": str(name), "lower": _plain(lim.get("lower")), "upper": _plain(lim.get("upper")),
                     "uniformity": uni_text})
    other = [(str(k), _plain(v)) for k, v in raw.items() if k not in ("limits", "uniformity")]
    return {"rows": rows, "other": other}


def _stat_columns(wafers: list[dict]) -> list[tuple[str, str]]:
    keys: list[str] = []
    for wafer in wafers:
        for stats in wafer["stats"].values():
            keys += [k for k in stats if k not in keys and not isinstance(stats[k], (dict, list))]
    ordered = [k for k in STAT_ORDER if k in keys] + [k for k in keys if k not in STAT_ORDER and k != "unit"]
    return [(k, STAT_LABELS.get(k, k)) for k in ordered]


def _map_counts(summary: dict, rows: list[dict], failed_count: int | None) -> list[tuple[str, str]]:
    counts = []
    n_sites = _first_int(summary, ("n_sites", "sites"))
    if n_sites is None and rows:
        n_sites = len(rows)
    if n_sites is not None:
        counts.append(("sites measured", str(n_sites)))
    if failed_count is not None:
        counts.append(("sites that could not be fitted", str(failed_count)))
    if rows:
        out = sum(1 for r in rows if not _site_failed(r) and _falsy(r.get("pass")))
        counts.append(("sites out of spec", str(out)))
    return counts


def _site_failed(row: dict) -> bool:
    status = str(row.get("status") or "").strip().lower()
    return status not in ("", "ok", "fitted", "pass", "passed", "converged")


SITE_FIXED_COLUMNS = {"site", "x_mm", "y_mm", "wafer", "status", "pass", "reduced_chi2", "reason"}


def _site_row(row: dict, columns: list[str]) -> dict:
    where = ", ".join(f"{c} {_cell(row.get(c))}" for c in ("wafer", "x_mm", "y_mm") if c in columns)
    values = ", ".join(f"{c} = {_cell(row.get(c))}" for c in columns
                       if c not in SITE_FIXED_COLUMNS and not c.endswith(".stderr") and row.get(c) not in (None, ""))
    return {"site": _cell(row.get("site")), "where": where, "status": _cell(row.get("status")),
            "reason": _cell(row.get("reason")), "site_values": values}


# -- check --------------------------------------------------------------------
def check_section(check: dict, folder: Path) -> dict:
    """Template data for a coating recipe check (check.json)."""
    design = _dict(check.get("design"))
    measured = _dict(check.get("measured"))
    yld = _dict(check.get("yield"))
    parts = []
    if design:
        parts.append(("design", design.get("pass")))
        if isinstance(design.get("color"), dict) and "pass" in design["color"]:
            parts.append(("design colour", design["color"].get("pass")))
    if yld and "pass" in yld:
        parts.append(("yield", yld.get("pass")))
    if measured:
        parts.append(("measured part", measured.get("pass")))
    verdict = check.get("pass")
    if not isinstance(verdict, bool):
        known = [v for _, v in parts if isinstance(v, bool)]
        verdict = all(known) if known else None
    status = {True: "pass", False: "fail", None: "warn"}[verdict]
    headline = {"pass": "Recipe check passes", "fail": "Recipe check fails", "warn": "Recipe check: no verdict"}[status]
    reasons = []
    for label, ok in parts:
        reasons.append(f"{label}: {'pass' if ok is True else 'FAIL' if ok is False else 'not judged'}")
    reasons += _band_reasons("design", _list(design.get("bands")))
    reasons += _band_reasons("measured", _list(measured.get("bands")))
    if yld:
        reasons.append(_yield_sentence(yld))
    return {
        "kind": "check", "title": JOB_TITLES["check"], "source": JOB_FILES["check"],
        "status": status, "headline": headline, "reasons": reasons,
        "warnings": [str(w) for w in _list(check.get("warnings")) + _list(check.get("notes"))],
        "design_bands": _bands(_list(design.get("bands"))),
        "design_pass": design.get("pass"),
        "color": _color_rows(design.get("color")),
        "sensitivity": _sensitivity(check.get("sensitivity")),
        "yield": _yield_rows(yld),
        "measured_pass": measured.get("pass") if measured else None,
        "has_measured": bool(measured),
        "measured_bands": _bands(_list(measured.get("bands"))),
        "measured_color": _color_rows(measured.get("color")),
        "drift": _drift_rows(_dict(measured.get("drift"))),
        "measured_rows": _measured_rows(measured),
        "provenance": _provenance(check, folder / JOB_FILES["check"]),
        "extra": _extra(check, {"design", "measured", "yield", "sensitivity", "pass", "warnings", "notes",
                                "provenance"}),
    }


def _bands(raw: list) -> list[dict]:
    rows = []
    for band in raw:
        if not isinstance(band, dict):
            continue
        rows.append({
            "name": _plain(band.get("name", "")),
            "pass": band.get("pass"),
            "margin": fmt(_float(band.get("worst_margin")), 4),
            "at_nm": fmt(_float(band.get("at_nm")), 5),
            "other": ", ".join(f"{k} {_plain(v)}" for k, v in band.items()
                               if k not in ("name", "pass", "worst_margin", "at_nm")),
        })
    return rows


def _band_reasons(label: str, bands: list) -> list[str]:
    out = []
    for band in bands:
        if isinstance(band, dict) and band.get("pass") is False:
            out.append(f"{label} band '{band.get('name', '?')}' fails: worst margin "
                       f"{fmt(_float(band.get('worst_margin')), 4)} at {fmt(_float(band.get('at_nm')), 5)} nm")
    return out


def _yield_sentence(yld: dict) -> str:
    frac, ci = _float(yld.get("pass_fraction")), _list(yld.get("ci95"))
    text = f"expected yield {fmt_pct(frac)}"
    if len(ci) == 2:
        text += f" (95 % interval {fmt_pct(_float(ci[0]))} .. {fmt_pct(_float(ci[1]))})"
    if yld.get("trials") is not None:
        text += f" over {_plain(yld['trials'])} trials"
    if yld.get("min_yield") is not None:
        text += f"; required {fmt_pct(_float(yld['min_yield']))}"
    if yld.get("worst_layer"):
        text += f"; most critical layer: {_plain(yld['worst_layer'])}"
    return text


def _yield_rows(yld: dict) -> list[tuple[str, str]]:
    rows = []
    for key, value in yld.items():
        if key in ("pass_fraction", "min_yield"):
            rows.append((key.replace("_", " "), fmt_pct(_float(value))))
        elif key == "ci95" and len(_list(value)) == 2:
            rows.append(("95 % interval", f"{fmt_pct(_float(value[0]))} .. {fmt_pct(_float(value[1]))}"))
        else:
            rows.append((key.replace("_", " "), _plain(value)))
    return rows


def _color_rows(raw: Any) -> list[tuple[str, str]]:
    if not isinstance(raw, dict):
        return []
    return [(str(k), _plain(v)) for k, v in raw.items()]


def _sensitivity(raw: Any) -> dict | None:
    """Rows (layer, band, slope, where, shift at tolerance, criticality), most critical layer first.

    Shape written by lamina check: {method, tolerance_basis, ranking: [layer...],
    layers: {layer: {tolerance_nm, criticality, bands: {band: {...}}}}}; anything else
    is shown as it is.
    """
    if not raw:
        return None
    raw_layers = raw.get("layers") if isinstance(raw, dict) else None
    if not isinstance(raw_layers, dict) or not all(isinstance(v, dict) for v in raw_layers.values()):
        return {"rows": [], "notes": [], "generic": raw}
    ranking = [n for n in _list(raw.get("ranking")) if isinstance(n, str) and n in raw_layers]
    order = ranking + [n for n in raw_layers if n not in ranking]
    rows = []
    for name in order:
        layer = raw_layers[name]
        bands = _dict(layer.get("bands"))
        for i, (band, entry) in enumerate(bands.items() or [("—", {})]):
            entry = _dict(entry)
            rows.append({
                "layer": str(name) if i == 0 else "", "rank": order.index(name) + 1 if i == 0 else "",
                "tolerance": fmt(_float(layer.get("tolerance_nm")), 3) if i == 0 else "",
                "layer_criticality": fmt(_float(layer.get("criticality")), 3) if i == 0 else "",
                "band": str(band), "slope": fmt(_float(entry.get("max_abs_derivative")), 3),
                "unit": str(entry.get("unit") or ""), "at_nm": fmt(_float(entry.get("at_nm")), 5),
                "shift": fmt(_float(entry.get("shift_at_tolerance")), 3),
                "criticality": fmt(_float(entry.get("criticality")), 3),
            })
    notes = [f"{k.replace('_', ' ')}: {_plain(v)}" for k, v in raw.items() if k not in ("layers", "ranking")]
    return {"rows": rows, "notes": notes, "generic": None}


def _measured_rows(measured: dict) -> list[tuple[str, str]]:
    """The drift fit's own facts: largest deviation, pre-fit scale, fit status, files."""
    rows = []
    if measured.get("largest"):
        rows.append(("largest deviation", _plain(measured["largest"])))
    if measured.get("prefit_scale") is not None:
        rows.append(("common thickness scale (pre-fit)", fmt(_float(measured["prefit_scale"]), 6)))
    fit = _dict(measured.get("fit"))
    if fit:
        stats = _dict(fit.get("statistics"))
        state = {True: "converged", False: "did not converge"}.get(fit.get("converged"), "unknown")
        if stats.get("reduced_chi2") is not None:
            state += f", reduced chi-square {fmt(_float(stats.get('reduced_chi2')), 4)}"
        rows.append(("drift fit", state))
        rows += [("drift fit warning", str(w)) for w in _list(fit.get("warnings"))]
    files = _list(measured.get("files"))
    if files:
        rows.append(("measured files", ", ".join(str(f) for f in files)))
    return rows


def _drift_rows(raw: dict) -> list[dict]:
    rows = []
    for name, entry in raw.items():
        if not isinstance(entry, dict):
            continue
        delta = _float(entry.get("delta_nm"))
        stderr = _float(entry.get("stderr"))
        rows.append({
            "name": str(name), "sort": -abs(delta) if delta is not None else 0.0,
            "design": fmt(_float(entry.get("design")), 5),
            "fitted": fmt_pm(_float(entry.get("fitted")), stderr),
            "delta_nm": fmt_like(delta, stderr, signed=True),
            "delta_pct": fmt(_float(entry.get("delta_pct")), 3, signed=True),
        })
    return sorted(rows, key=lambda r: r["sort"])  # largest deviation first


# -- shared -------------------------------------------------------------------
#: provenance keys that map input file names to sha256 digests
_DIGEST_KEYS = ("data_sha256", "sha256", "input_sha256")
#: provenance / inputs keys that name model files (shown as text when still unchanged)
_MODEL_KEYS = ("model", "recipe")


def _provenance(job: dict, job_file: Path) -> dict:
    """Version, dates, input files with sha256 (recorded, or computed now when not recorded), models."""
    raw = dict(_dict(job.get("provenance")))
    inputs = _dict(job.get("inputs"))
    recorded: dict[str, str] = {}
    for key in _DIGEST_KEYS:
        recorded.update({str(k): str(v) for k, v in _dict(raw.pop(key, None)).items() if v})
    files = [{"name": name, "sha256": sha, "note": "recorded at run time"} for name, sha in recorded.items()]
    for key, value in inputs.items():
        for name in (value if isinstance(value, list) else [value]):
            if isinstance(name, str) and name and name not in recorded:
                digest = _sha256_or_none(Path(name))
                note = "digest computed at report time" if digest else "file not found at report time"
                files.append({"name": name, "sha256": digest or "—", "note": f"{key}; {note}"})
    rows = [(str(k), _plain(v)) for k, v in raw.items() if v not in (None, "", [])]
    try:
        written = _dt.datetime.fromtimestamp(job_file.stat().st_mtime, _dt.timezone.utc)
        rows.append((f"{job_file.name} written", written.strftime("%Y-%m-%d %H:%M:%S UTC")))
    except OSError:
        pass
    models = _model_texts({**inputs, **raw}, recorded)
    return {"files": files, "rows": rows, "models": models}


def _model_texts(fields: dict, recorded: dict[str, str]) -> list[dict]:
    """Text of the model files the job names, when they still exist and match a recorded digest."""
    texts = []
    for key in _MODEL_KEYS:
        name = fields.get(key)
        if not isinstance(name, str) or not name.endswith(".toml"):
            continue
        path = Path(name)
        digest = _sha256_or_none(path)
        if digest is None:
            continue
        if name in recorded and recorded[name] != digest:
            texts.append({"name": name, "text": "", "cut": False,
                          "note": "the file has changed since the run; not shown"})
            continue
        text = path.read_text(encoding="utf-8", errors="replace")
        texts.append({"name": name, "text": text[:MAX_TEXT_CHARS], "cut": len(text) > MAX_TEXT_CHARS,
                      "note": f"named by the {key} entry of the provenance" if name in recorded else
                      f"named by the {key} entry of the provenance; read from {path.resolve()} when the report "
                      "was built (no digest was recorded, so it may differ from the file the run used)"})
    return texts


def _sha256_or_none(path: Path) -> str | None:
    import hashlib
    try:
        return hashlib.sha256(path.read_bytes()).hexdigest() if path.is_file() else None
    except OSError:
        return None


def _overall(sections: list[dict]) -> str:
    statuses = {s["status"] for s in sections}
    return "fail" if "fail" in statuses else "warn" if "warn" in statuses else "pass"


def _extra(raw: dict, known: set[str]) -> dict:
    """Keys a newer lamina may add: shown generically rather than dropped."""
    return {str(k): v for k, v in raw.items() if k not in known}


#: plots whose name starts so come first, in this order (the main picture of each job first)
PLOT_PRIORITY = ("spectra", "nk", "map_", "radial", "histogram", "trend", "check_")


def _plot_order(path: Path) -> tuple:
    rank = next((i for i, prefix in enumerate(PLOT_PRIORITY) if path.name.startswith(prefix)), len(PLOT_PRIORITY))
    return rank, path.name


def _caption(stem: str) -> str:
    return stem


def _dict(value: Any) -> dict:
    return value if isinstance(value, dict) else {}


def _list(value: Any) -> list:
    return list(value) if isinstance(value, (list, tuple)) else []


def _float(value: Any) -> float | None:
    if isinstance(value, bool) or value is None:
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _first_int(raw: dict, keys: Iterable[str]) -> int | None:
    for key in keys:
        value = raw.get(key)
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return int(value)
        if isinstance(value, list):
            return len(value)
    return None


def _falsy(value: Any) -> bool:
    return str(value).strip().lower() in ("false", "0", "no", "fail")


def _cell(value: Any) -> str:
    if value is None:
        return ""
    number = _float(value) if not isinstance(value, str) or _looks_numeric(value) else None
    if number is not None and isinstance(value, str) and "." in value:
        return fmt(number, 6)
    return str(value)


def _looks_numeric(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _plain(value: Any) -> str:
    """A JSON value as short text (numbers to 6 significant digits)."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return fmt(value, 6)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_plain(v) for v in value) + "]"
    if isinstance(value, dict):
        return ", ".join(f"{k}: {_plain(v)}" for k, v in value.items())
    return str(value)


def fmt(value: float | None, digits: int = 6, signed: bool = False) -> str:
    """A number to `digits` significant digits; '—' for a missing value."""
    if value is None:
        return "—"
    return f"{value:+.{digits}g}" if signed else f"{value:.{digits}g}"


def _decimals_for(stderr: float | None) -> int | None:
    """Decimals that show two significant digits of the uncertainty (common practice)."""
    if stderr is None or stderr <= 0:
        return None
    return max(0, min(12, 1 - math.floor(math.log10(stderr))))


def fmt_like(value: float | None, stderr: float | None, signed: bool = False) -> str:
    """`value` rounded like its uncertainty (to the decimal of sigma's second digit)."""
    decimals = _decimals_for(stderr)
    if value is None:
        return "—"
    if decimals is None or abs(value) >= 1e7:
        return fmt(value, 6, signed)
    return f"{value:+.{decimals}f}" if signed else f"{value:.{decimals}f}"


def fmt_pm(value: float | None, stderr: float | None) -> str:
    """'value ± sigma' with sigma to two significant digits; 'value' alone without sigma."""
    if value is None:
        return "—"
    decimals = _decimals_for(stderr)
    if decimals is None or abs(value) >= 1e7:
        return fmt(value, 6) + ("" if stderr is None else f" ± {fmt(stderr, 2)}")
    return f"{value:.{decimals}f} ± {stderr:.{decimals}f}"


def fmt_pct(fraction: float | None) -> str:
    """A fraction 0..1 as a percentage with one decimal."""
    return "—" if fraction is None else f"{100.0 * fraction:.1f} %"


def _now_utc() -> str:
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")


@functools.lru_cache(maxsize=1)
def _environment():
    """The jinja2 environment, built once per process (compiling the templates is the slow part)."""
    import jinja2
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(Path(__file__).parent / "templates")),
        autoescape=True,  # every string from the folder is user data
        undefined=jinja2.StrictUndefined,
        trim_blocks=True, lstrip_blocks=True,
    )
    env.filters["plain"] = _plain
    env.tests["mapping"] = lambda v: isinstance(v, dict)
    env.tests["sequence_value"] = lambda v: isinstance(v, (list, tuple))
    return env
