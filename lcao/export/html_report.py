"""``report.html``: one self-contained page per results folder, rebuilt from the outputs on disk.

It reads what `lcao run`, `series`, `curve` and `sheet` wrote (``series.csv``, each member's ``curve.json`` and
SVG figures, ``sheet.json``, the kinetics files, the copied ``study.toml``) and never computes or opens the
store. Figures are inlined as SVG; nothing is fetched from anywhere. Jinja2 renders the page with
autoescaping on, so text from user input (titles, group names) is shown as text.
"""

from __future__ import annotations

import csv
import datetime as _dt
import json
import os
import re
import tomllib
from dataclasses import dataclass, field

from ..errors import InputError

#: the summary table: (series.csv column, heading, format or None for text)
SUMMARY_COLUMNS = (
    ("species", "species", None),
    ("level", "level", None),
    ("verdict", "verdict", None),
    ("multiplicity", "2S+1", "d"),
    ("re_angstrom", "r_e / A", ".5f"),
    ("handbook_re_angstrom", "hb r_e", ".5f"),
    ("error_re_angstrom", "err", "+.5f"),
    ("we_cm1", "omega_e / cm-1", ".1f"),
    ("handbook_we_cm1", "hb omega_e", ".1f"),
    ("error_we_cm1", "err", "+.1f"),
    ("de_ev", "D_e / eV", ".3f"),
    ("d0_ev", "D_0 / eV", ".3f"),
    ("handbook_d0_ev", "hb D_0", ".3f"),
    ("error_d0_ev", "err", "+.3f"),
    ("bond_order_mo_count", "bond order (MO)", ".1f"),
    ("bond_order_mayer", "Mayer", ".3f"),
    ("unpaired_electrons", "unpaired", "d"),
    ("magnetism", "magnetism", None),
)
FIGURES = ("curve.svg", "orbital-levels.svg", "bond-orders.svg")
GROUP_FIGURES = ("series-re.svg", "series-bond-orders.svg", "series-levels.svg")
KINETICS_FILES = ("thermo-species.yaml", "thermo-nasa7.txt", "dissociation.csv")


@dataclass
class ReportData:
    title: str
    folder: str
    groups: list = field(default_factory=list)
    sheets: list = field(default_factory=list)
    missing: list = field(default_factory=list)
    cautions: dict = field(default_factory=dict)
    levels: dict = field(default_factory=dict)
    versions: dict = field(default_factory=dict)
    provenance: dict = field(default_factory=dict)
    study_text: str | None = None


def inline_svg(path: str) -> str:
    """An SVG file's <svg> element, without the XML prolog, doctype and metadata (no URL left to follow)."""
    with open(path, encoding="utf-8") as fh:
        text = fh.read()
    start = text.find("<svg")
    text = text[start:] if start >= 0 else ""
    return re.sub(r"<metadata>.*?</metadata>", "", text, flags=re.S)


def _shown(raw: str, fmt: str | None) -> str:
    if fmt is None or raw in ("", None):
        return raw or ""
    try:
        value = float(raw)
    except ValueError:
        return raw
    if fmt == "d":
        return str(int(value)) if value == int(value) else raw
    return format(value, fmt)


def _read_json(path):
    try:
        with open(path, encoding="utf-8") as fh:
            return json.load(fh)
    except (OSError, ValueError):
        return None


def _num(v, fmt, unit=""):
    if v is None:
        return "-"
    return f"{format(v, fmt)}{(' ' + unit) if unit else ''}"


def _pm(v, u, fmt, unit):
    if v is None:
        return "-"
    return f"{format(v, fmt)} +/- {u:.2g} {unit}" if u is not None else f"{format(v, fmt)} {unit}"


def member_view(folder: str, name: str, data: ReportData, row: dict | None = None) -> dict:
    """What the page shows of one member folder (its curve.json and figures). A series member always has
    curve.svg; a curve run with --no-plots has none, and that is no gap."""
    doc = _read_json(os.path.join(folder, "curve.json"))
    if doc is None:
        data.missing.append(f"{name}: curve.json is missing or unreadable")
        doc = {}
    fit = doc.get("fit") or {}
    inputs = doc.get("inputs") or {}
    level = (inputs.get("level") or {}).get("text", row.get("level") if row else "")
    species = inputs.get("species", row.get("species") if row else name)
    if doc.get("caution"):
        data.cautions.setdefault(doc["caution"], None)
    if level:
        data.levels.setdefault(level, None)
    data.versions = data.versions or doc.get("versions") or {}
    if doc.get("protocol_version") is not None:
        data.provenance.setdefault(f"protocol version {doc['protocol_version']} (curve.json)", None)
    rows = []
    if fit:
        morse = fit.get("morse") or {}
        rows = [
            ("r_e", _pm(fit.get("re_angstrom"), fit.get("re_uncertainty_angstrom"), ".5f", "A")),
            ("local fit window", " - ".join(f"{x:.4f}" for x in fit.get("local_window_angstrom") or []) + " A"
             f" ({fit.get('local_points')} points, rms {_num(fit.get('local_rms_hartree'), '.2e', 'Eh')})"),
            ("omega_e", _num(fit.get("we_cm1"), ".2f", "cm-1")),
            ("omega_e x_e", _num(fit.get("wexe_cm1"), ".3f", "cm-1")),
            ("B_e", _num(fit.get("be_cm1"), ".5f", "cm-1")),
            ("alpha_e", _num(fit.get("alpha_e_cm1"), ".5f", "cm-1")),
            ("D_e", _num(fit.get("de_ev"), ".4f", "eV") + (f" ({fit['de_source']})" if fit.get("de_source") else "")),
            ("D_0", _num(fit.get("d0_ev"), ".4f", "eV")),
            ("ZPE", _num(fit.get("zpe_cm1"), ".1f", "cm-1")),
            ("Morse", (f"{morse.get('kind', 'fitted')}: D_e {_num(morse.get('de_ev'), '.4f', 'eV')},"
                       f" a {_pm(morse.get('a_per_angstrom'), morse.get('a_uncertainty_per_angstrom'), '.4f', '1/A')},"
                       " window " + " - ".join(f"{x:.4f}" for x in morse.get("window_angstrom") or []) + " A")
             if morse else (fit.get("morse_error") or "none")),
        ]
    vib = fit.get("vibrational_levels") or {}
    levels = [{"v": lv["v"], "g": f"{lv['g_cm1']:.2f}", "b": _num(lv.get("bv_cm1"), ".5f")} for lv in vib.get("levels", [])]
    bond = []
    if row:
        for key, label, fmt in (("bond_order_mo_count", "MO counting", ".1f"), ("bond_order_mayer", "Mayer", ".3f"),
                                ("bond_order_mulliken", "Mulliken overlap population", ".3f"),
                                ("unpaired_electrons", "unpaired electrons", None), ("magnetism", "magnetism", None),
                                ("s2", "<S^2>", ".4f")):
            if row.get(key) not in (None, ""):
                bond.append((label, _shown(row[key], fmt)))
    notes = list(doc.get("notes") or []) + list(fit.get("warnings") or [])
    if row and row.get("status") == "failed":
        notes.insert(0, f"failed: {row.get('reason')}")
    figures = [inline_svg(os.path.join(folder, f)) for f in FIGURES if os.path.exists(os.path.join(folder, f))]
    if row is not None and not os.path.exists(os.path.join(folder, FIGURES[0])):
        data.missing.append(f"{name}: curve.svg is missing")
    counts = doc.get("counts") or {}
    return {
        "species": species, "level": level, "anchor": re.sub(r"[^A-Za-z0-9_-]", "_", name),
        "verdict": fit.get("verdict_detail") or (row or {}).get("verdict_detail") or (row or {}).get("verdict"),
        "multiplicity": inputs.get("multiplicity", (row or {}).get("multiplicity")),
        "reference": inputs.get("reference", (row or {}).get("reference")),
        "counts": ", ".join(f"{k} {v}" for k, v in counts.items()) if counts else "no point counts",
        "fit": rows, "levels": levels, "levels_method": vib.get("method", ""), "bond_orders": bond,
        "notes": notes, "figures": figures,
    }


def group_view(folder: str, name: str, data: ReportData) -> dict:
    from ..series import member_folder

    with open(os.path.join(folder, "series.csv"), encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(fh))
    doc = _read_json(os.path.join(folder, "series.json")) or {}
    if doc.get("caution"):
        for text in (doc["caution"] if isinstance(doc["caution"], list) else [doc["caution"]]):
            data.cautions.setdefault(text, None)
    data.versions = data.versions or doc.get("versions") or {}
    table, members, sources = [], [], {}
    for r in rows:
        data.levels.setdefault(r.get("level", ""), None)
        cells = [{"key": k, "raw": r.get(k, ""), "shown": _shown(r.get(k, ""), f), "text": f is None}
                 for k, _, f in SUMMARY_COLUMNS]
        if r.get("status") in ("failed", "skipped"):
            cells[2] = {"key": "verdict", "raw": r.get("reason", ""), "shown": f"{r['status']}: {r.get('reason', '')}",
                        "text": True}
        table.append({"species": r["species"], "level": r["level"], "cells": cells})
        if r.get("handbook_source"):
            sources[f"{r['species']}: {r['handbook_source']} ({r.get('handbook_checked', '')})"] = None
        sub = member_folder(r["species"], r["level"])
        path = os.path.join(folder, sub)
        if r.get("status") != "ok":  # a failed or skipped member has no folder; its reason is in the table
            continue
        if not os.path.isdir(path):
            data.missing.append(f"{name}: the member folder {sub} is missing ({r['species']} at {r['level']})")
            continue
        members.append(member_view(path, f"{name} / {sub}", data, r))
    kinetics = []
    for root, _dirs, files in sorted(os.walk(folder)):
        rel = os.path.relpath(root, folder)
        if rel != "." and not rel.startswith("kinetics-"):
            continue
        for f in KINETICS_FILES[:2]:
            if f in files:
                with open(os.path.join(root, f), encoding="utf-8") as fh:
                    kinetics.append({"name": os.path.normpath(os.path.join(rel, f)), "text": fh.read()})
    figures = [inline_svg(os.path.join(folder, f)) for f in GROUP_FIGURES if os.path.exists(os.path.join(folder, f))]
    return {"name": name, "rows": table, "members": members, "handbook_sources": list(sources), "kinetics": kinetics,
            "figures": figures}


def sheet_view(folder: str, name: str, data: ReportData) -> dict:
    doc = _read_json(os.path.join(folder, "sheet.json")) or {}
    rec = (doc.get("records") or [{}])[0]
    prov = rec.get("provenance") or {}
    if prov.get("caution"):
        data.cautions.setdefault(prov["caution"], None)
    line = "no dissociation equilibrium (no D_0)"
    path = os.path.join(folder, "dissociation.csv")
    if os.path.exists(path):
        with open(path, encoding="utf-8") as fh:
            heads = [ln[2:].strip() for ln in fh if ln.startswith("#")]
        line = "; ".join(heads[:2])
    kinetics = []
    for f in KINETICS_FILES:
        p = os.path.join(folder, f)
        if os.path.exists(p):
            with open(p, encoding="utf-8") as fh:
                kinetics.append({"name": f, "text": fh.read()})
    figures = [inline_svg(os.path.join(folder, f)) for f in ("dissociation.svg", "thermo.svg")
               if os.path.exists(os.path.join(folder, f))]
    return {"species": rec.get("species", name), "level": rec.get("level", ""), "anchor": "sheet_" + re.sub(r"\W", "_", name),
            "dissociation_line": line, "kinetics": kinetics, "figures": figures}


def collect(results_dir: str, title: str | None = None) -> ReportData:
    """Everything the page shows, read from a results folder (a study's, a series', a curve's or a sheet's)."""
    if not os.path.isdir(results_dir):
        raise InputError(f"results folder {results_dir} does not exist")
    data = ReportData(title or "", os.path.abspath(results_dir))
    study = os.path.join(results_dir, "study.toml")
    if os.path.exists(study):
        with open(study, encoding="utf-8") as fh:
            data.study_text = fh.read()
        try:
            data.title = data.title or str(tomllib.loads(data.study_text).get("title", ""))
        except tomllib.TOMLDecodeError:
            data.missing.append("study.toml could not be read as TOML")
    order = _read_json(os.path.join(results_dir, "groups.json"))
    subdirs = sorted(d for d in os.listdir(results_dir) if os.path.isdir(os.path.join(results_dir, d)))
    if order:
        for g in order:
            path = os.path.join(results_dir, g["folder"])
            if os.path.exists(os.path.join(path, "series.csv")):
                data.groups.append(group_view(path, g["name"], data))
            else:
                data.missing.append(f"group {g['name']!r}: {g['folder']}/series.csv is missing")
    elif os.path.exists(os.path.join(results_dir, "series.csv")):
        data.groups.append(group_view(results_dir, data.title or "series", data))
    elif os.path.exists(os.path.join(results_dir, "curve.json")):
        m = member_view(results_dir, os.path.basename(os.path.abspath(results_dir)), data)
        data.groups.append({"name": f"{m['species']} at {m['level']}", "rows": [], "members": [m],
                            "handbook_sources": [], "kinetics": [], "figures": []})
    if os.path.exists(os.path.join(results_dir, "sheet.json")):
        data.sheets.append(sheet_view(results_dir, os.path.basename(os.path.abspath(results_dir)), data))
    for d in subdirs:
        if os.path.exists(os.path.join(results_dir, d, "sheet.json")):
            data.sheets.append(sheet_view(os.path.join(results_dir, d), d, data))
    if not data.groups and not data.sheets:
        raise InputError(f"{results_dir} holds no lcao results (no series.csv, curve.json or sheet.json)")
    store = os.path.join(results_dir, "lcao-store.sqlite")
    data.provenance.setdefault(f"results store: {store if os.path.exists(store) else 'not in this folder'}", None)
    data.title = data.title or f"lcao results: {os.path.basename(os.path.abspath(results_dir))}"
    return data


def render_report(data: ReportData) -> str:
    import jinja2

    env = jinja2.Environment(loader=jinja2.PackageLoader("lcao", "templates"), autoescape=True,
                             undefined=jinja2.StrictUndefined)
    cols = [{"key": k, "head": h, "text": f is None} for k, h, f in SUMMARY_COLUMNS]
    provenance = list(data.provenance)
    for g in data.groups:
        provenance += [f"handbook value, {s}" for s in g["handbook_sources"]]
    return env.get_template("report.html.j2").render(
        title=data.title, built=_dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        versions={"lcao": "", "pyscf": "", **data.versions}, folder=data.folder, levels=list(data.levels),
        cautions=list(data.cautions), missing=data.missing, study_text=data.study_text, groups=data.groups,
        summary_columns=cols, sheets=data.sheets, provenance=provenance)


def write_report(results_dir: str, title: str | None = None) -> tuple[str, list[str]]:
    """Build ``report.html`` in ``results_dir``; returns its path and what was missing."""
    from .io import atomic_write_bytes

    data = collect(results_dir, title)
    path = os.path.join(results_dir, "report.html")
    atomic_write_bytes(path, render_report(data).encode("utf-8"))
    return path, data.missing
