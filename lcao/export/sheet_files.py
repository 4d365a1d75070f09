"""``sheet.json``, ``sheet.csv`` (one flat record) and ``thermo.csv`` (the temperature grid)."""

from __future__ import annotations

import csv
import io

from .io import json_text


def sheet_csv(sheet) -> str:
    rec = dict(sheet.record)
    p = sheet.provenance
    rec["source"] = p.get("source")
    rec["verdict"] = p.get("verdict")
    rec["morse_kind"] = p.get("morse_kind")
    rec["level_d_shells"] = (p.get("level") or {}).get("d_shells", "")
    rec["lcao_version"] = p["versions"]["lcao"]
    rec["pyscf_version"] = p["versions"]["pyscf"]
    rec["date"] = p["date"]
    rec["warnings"] = " | ".join(p.get("warnings", []))
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=list(rec), lineterminator="\n")
    w.writeheader()
    w.writerow({k: "" if v is None else v for k, v in rec.items()})
    return buf.getvalue()


def thermo_csv(sheet) -> str:
    t = sheet.thermo
    cols = ["t_k", "cp_j_per_mol_k", "s_j_per_mol_k", "h_minus_h298_kj_per_mol", "gef_j_per_mol_k"]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(cols + ["cp_polynomial_j_per_mol_k", "s_polynomial_j_per_mol_k"])
    cp_p = sheet.nasa.cp(t["t_k"])
    s_p = sheet.nasa.s(t["t_k"])
    for i in range(len(t["t_k"])):
        w.writerow([f"{t[c][i]:.6g}" for c in cols] + [f"{cp_p[i]:.6g}", f"{s_p[i]:.6g}"])
    return buf.getvalue()


def _doc(sheet):
    from ..sheet import sheet_document

    return json_text(sheet_document(sheet)).encode()


def _kinetics(kind):
    def write(sheet):
        from .kinetics_files import nasa7_text, species_yaml

        p = sheet.provenance
        args = (list(sheet.species_set), sheet.handoff, p["date"], p["versions"])
        if kind == "yaml":
            return species_yaml(*args, phase=f"{sheet.species_set[0].name}-dissociation").encode()
        return nasa7_text(*args).encode()
    return write


def _dissociation(sheet):
    from .kinetics_files import dissociation_csv

    return dissociation_csv(sheet.dissociation, sheet.handoff, d0_origin(sheet)).encode()


def d0_origin(sheet) -> str:
    """Where the sheet's D_0 comes from: the level of theory or the handbook row."""
    src = sheet.provenance.get("field_sources", {}).get("d0", "computed")
    if src == "handbook":
        row = sheet.provenance.get("handbook_row") or {}
        return f"the handbook ({row.get('source', 'shipped table')})"
    return sheet.record["level"]


SHEET_WRITERS = {
    "sheet.json": _doc,
    "sheet.csv": lambda sheet: sheet_csv(sheet).encode(),
    "thermo.csv": lambda sheet: thermo_csv(sheet).encode(),
    "thermo-species.yaml": _kinetics("yaml"),
    "thermo-nasa7.txt": _kinetics("nasa7"),
}


def sheet_writers(sheet) -> dict:
    """The writers for one sheet: ``dissociation.csv`` only where there is a D_0 to rest on."""
    return {**SHEET_WRITERS, **({"dissociation.csv": _dissociation} if sheet.dissociation is not None else {})}
