"""Files that kinetics codes read without editing, and the dissociation equilibrium.

``thermo-species.yaml``: Cantera's YAML species schema (an ideal-gas phase listing the molecule, its
atoms and, for ions, the electron; NASA7, or NASA9 when asked, low range first, with the reference
pressure written out). ``thermo-nasa7.txt``: the fixed-column NASA 7-coefficient records of McBride,
Gordon & Reno (NASA TM-4513, 1993): four 80-column lines per species, upper range first, the line number
in column 80, inside the THERMO section header and END. ``dissociation.csv``: K_p, Delta_r H, Delta_r G and
the degree of dissociation of AB <=> A + B.

Every file opens with comment lines: the level of theory, the date, where each Delta_f H(298.15 K) came
from, the reference pressure and the caution.
"""

from __future__ import annotations

import csv
import io
import json

import numpy as np
from scipy import constants as c

from ..errors import InputError

#: the fixed-column layout's limits: the name field (columns 1-18) and four element fields (columns 25-44)
NAME_COLUMNS = 18
ELEMENT_FIELDS = 4
KINETICS_CAUTION = (
    "Computed thermochemistry, for screening: use validated evaluated data (NIST-JANAF, ATcT, Burcat) and licensed"
    " practice for any design or safety decision."
)


def check_entries(entries) -> None:
    """The fixed-column layout's limits, checked before anything is written (InputError names the species)."""
    for e in entries:
        if not e.name or any(ch.isspace() for ch in e.name) or "!" in e.name:
            raise InputError(f"species name {e.name!r} cannot be written: no spaces or '!' in a kinetics-file name")
        if len(e.name) > NAME_COLUMNS:
            raise InputError(f"species name {e.name!r} has {len(e.name)} characters; the fixed-column NASA7 layout"
                             f" holds {NAME_COLUMNS} (choose a shorter --name)")
        if len(e.composition) > ELEMENT_FIELDS:
            raise InputError(f"species {e.name} has {len(e.composition)} elements (the electron counts as one); the"
                             f" fixed-column NASA7 layout holds {ELEMENT_FIELDS}")
        for sym, n in e.composition:
            if len(sym) > 2 or not -99 <= n <= 999:
                raise InputError(f"species {e.name}: element field {sym} {n} does not fit the fixed-column layout")


def merge_entries(sets) -> list:
    """Species of several sheets, each name once (atoms shared by several molecules); two different
    species under one name are refused."""
    out: dict = {}
    for entries in sets:
        for e in entries:
            old = out.get(e.name)
            if old is not None and old.kind == "molecule" and e.kind == "molecule":
                raise InputError(f"two molecules named {e.name} in one kinetics file: give a --name suffix")
            out.setdefault(e.name, e)
    return list(out.values())


def header_lines(entries, handoff: dict, date: str, versions: dict) -> list[str]:
    p = handoff["reference_pressure"]
    lines = [
        f"written by lcao {versions.get('lcao', '')} (PySCF {versions.get('pyscf', '')}) on {date}",
        f"reference pressure {'1 bar (100000 Pa)' if p == '1bar' else '1 atm (101325 Pa)'}: the polynomials give the"
        " standard-state S and G at that pressure",
        "temperatures in K; Cp/R, H/RT and S/R as in McBride, Gordon & Reno, NASA TM-4513 (1993)",
    ]
    lines += [e.note for e in entries]
    lines.append(KINETICS_CAUTION)
    return lines


def _yaml_str(text: str) -> str:
    return json.dumps(text, ensure_ascii=False)


def _yaml_floats(values) -> str:
    return "[" + ", ".join(repr(float(v)) for v in values) + "]"


def species_yaml(entries, handoff: dict, date: str, versions: dict, phase: str) -> str:
    """Cantera's YAML species schema for ``entries``, with one ideal-gas phase holding them all."""
    check_entries(entries)
    nine = handoff.get("nasa9") or {}
    elements = list(dict.fromkeys(sym for e in entries for sym, _ in e.composition))
    p = "1 bar" if handoff["reference_pressure"] == "1bar" else "1 atm"
    out = [f"# {line}" for line in header_lines(entries, handoff, date, versions)]
    out += [
        f"description: {_yaml_str('lcao kinetics hand-off: ' + phase)}",
        f"generator: {_yaml_str('lcao ' + versions.get('lcao', ''))}",
        f"date: {_yaml_str(date)}",
        "",
        "phases:",
        f"- name: {_yaml_str(phase)}",
        "  thermo: ideal-gas",
        f"  elements: [{', '.join(_yaml_str(x) for x in elements)}]",
        f"  species: [{', '.join(_yaml_str(e.name) for e in entries)}]",
        f"  state: {{T: 300.0, P: {p}}}",
        "",
        "species:",
    ]
    for e in entries:
        fit = nine.get(e.name, e.nasa)
        model = "NASA9" if fit.form == "nasa9" else "NASA7"
        lo, hi = fit.ranges
        comp = ", ".join(f"{_yaml_str(sym)}: {n}" for sym, n in e.composition)
        out += [
            f"- name: {_yaml_str(e.name)}",
            f"  composition: {{{comp}}}",
            "  thermo:",
            f"    model: {model}",
            f"    temperature-ranges: {_yaml_floats([lo.t_low, fit.t_common, hi.t_high])}",
            f"    reference-pressure: {p}",
            "    data:",
            f"    - {_yaml_floats([*lo.cp_coeffs, lo.h_constant, lo.s_constant])}",
            f"    - {_yaml_floats([*hi.cp_coeffs, hi.h_constant, hi.s_constant])}",
            f"    note: {_yaml_str(e.note)}",
        ]
    return "\n".join(out) + "\n"


def _e15(x: float) -> str:
    text = f"{x:15.8E}"
    if len(text) != 15:
        raise InputError(f"coefficient {x!r} does not fit the 15 columns of the fixed-column layout")
    return text


def nasa7_record(entry, date_code: str) -> list[str]:
    """The four 80-column lines of one species (McBride, Gordon & Reno 1993, Table 2's layout)."""
    fit = entry.nasa
    if fit.form != "nasa7":
        raise InputError(f"species {entry.name}: the fixed-column layout holds NASA7 polynomials only")
    lo, hi = fit.ranges
    elements = "".join(f"{sym:<2s}{n:>3d}" for sym, n in entry.composition).ljust(5 * ELEMENT_FIELDS)
    line1 = (f"{entry.name:<18s}{date_code:<6.6s}{elements}G{lo.t_low:10.3f}{hi.t_high:10.3f}{fit.t_common:8.3f}"
             .ljust(79) + "1")
    up = [*hi.cp_coeffs, hi.h_constant, hi.s_constant]
    low = [*lo.cp_coeffs, lo.h_constant, lo.s_constant]
    line2 = "".join(_e15(v) for v in up[:5]).ljust(79) + "2"
    line3 = "".join(_e15(v) for v in up[5:] + low[:3]).ljust(79) + "3"
    line4 = "".join(_e15(v) for v in low[3:]).ljust(79) + "4"
    return [line1, line2, line3, line4]


def nasa7_text(entries, handoff: dict, date: str, versions: dict) -> str:
    """The THERMO section (comment lines with '!', the default temperatures, the records, END)."""
    check_entries(entries)
    lows = {e.nasa.ranges[0].t_low for e in entries}
    mids = {e.nasa.t_common for e in entries}
    highs = {e.nasa.ranges[1].t_high for e in entries}
    out = [f"! {line}" for line in header_lines(entries, handoff, date, versions)]
    out.append(f"! columns 19-24 hold the date as YYMMDD ({date[:10]})")
    out.append("THERMO ALL")
    out.append(f"{min(lows):10.3f}{min(mids):10.3f}{max(highs):10.3f}")
    code = date[2:4] + date[5:7] + date[8:10]
    for e in entries:
        out += nasa7_record(e, code)
    out.append("END")
    return "\n".join(out) + "\n"


def dissociation_csv(d, handoff: dict, level_text: str) -> str:
    """K_p(T) in bar units, log10 K_p, Delta_r H, Delta_r G and the degree of dissociation at the chosen
    pressure and at 1 bar; '#' lines first with D_0, its level and the caution."""
    buf = io.StringIO()
    p = d.pressure_bar
    buf.write(f"# dissociation {handoff['species']} <=> {handoff['products']}; standard pressure 1 bar\n")
    buf.write(f"# D_0 = {d.d0_j_per_mol / 1000:.3f} kJ/mol ({d.d0_j_per_mol / (c.e * c.N_A):.4f} eV) from {level_text}\n")
    buf.write("# degree of dissociation: fraction of the molecules dissociated at equilibrium, from the pure molecule\n")
    buf.write(f"# {KINETICS_CAUTION}\n")
    w = csv.writer(buf, lineterminator="\n")
    alpha_col = f"alpha_at_{p:g}_bar"
    cols = ["t_k", "kp_bar", "log10_kp_bar", "drh_kj_per_mol", "drg_kj_per_mol", "alpha_at_1_bar"]
    if alpha_col != "alpha_at_1_bar":
        cols.append(alpha_col)
    w.writerow(cols)
    for i, t in enumerate(d.t_k):
        row = [f"{t:.2f}", f"{d.kp_bar[i]:.8e}", f"{np.log10(d.kp_bar[i]):.6f}", f"{d.drh_j_per_mol[i] / 1000:.4f}",
               f"{d.drg_j_per_mol[i] / 1000:.4f}", f"{d.alpha_1bar[i]:.8e}"]
        if alpha_col != "alpha_at_1_bar":
            row.append(f"{d.alpha[i]:.8e}")
        w.writerow(row)
    return buf.getvalue()
