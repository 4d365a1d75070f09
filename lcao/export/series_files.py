"""``series.csv`` and ``series.json`` (one record per species and level), and the flat values of a
:class:`lcao.series.SeriesRow` with units in the field names (the conversions happen here)."""

from __future__ import annotations

import csv
import datetime as _dt
import io

from .io import json_text

SERIES_SCHEMA_VERSION = 1

#: handbook columns compared with computed ones (the same name on both sides)
HANDBOOK_COMPARED = ("re_angstrom", "we_cm1", "wexe_cm1", "be_cm1", "d0_ev")


def member_values(row) -> dict:
    """The computed values of a row, units in the names (``re_angstrom``, ``we_cm1``, ``de_ev``, ...)."""
    from .fit_fields import fit_document

    out: dict = {}
    if row.multiplicity is None:
        return out
    out.update(multiplicity=row.multiplicity, reference=row.reference, trusted_points=row.trusted_points,
               points=row.points, limit_energy_hartree=row.limit_energy_hartree)
    v = row.verdict
    out.update(verdict=None if v is None else v.kind, verdict_detail=None if v is None else v.detail,
               branch=row.branch, spatial_symmetry_broken=row.spatial_broken,
               spatial_symmetry_broken_in_well=row.spatial_in_well)
    if row.fit is None:
        return out
    f = fit_document(row.fit, verdict=v)
    for key in ("re_angstrom", "re_uncertainty_angstrom", "we_cm1", "wexe_cm1", "be_cm1", "alpha_e_cm1", "de_ev",
                "d0_ev", "zpe_cm1", "bound"):
        out[key] = f[key]
    out["morse_de_ev"] = f["morse"]["de_ev"] if f["morse"] else None
    out["morse_kind"] = f["morse"]["kind"] if f["morse"] else None
    out["well_branch"] = f["well_branch"]
    o = row.orbitals
    if o is not None:
        out.update(bond_order_mo_count=o.bond_order_mo_count, bond_order_mayer=o.bond_order_mayer,
                   bond_order_mulliken=o.bond_order_mulliken, unpaired_electrons=o.unpaired_electrons,
                   magnetism=o.magnetism, s2=o.s2)
    elif row.orbital_error:
        out["orbital_analysis_error"] = row.orbital_error
    return out


def signed_errors(row, values: dict | None = None) -> dict:
    """Computed minus handbook for :data:`HANDBOOK_COMPARED`, where the handbook's multiplicity is the
    one computed."""
    values = member_values(row) if values is None else values
    hb = row.handbook
    if not hb or hb.get("multiplicity") != row.multiplicity:
        return {}
    return {k: values[k] - hb[k] for k in HANDBOOK_COMPARED if hb.get(k) is not None and values.get(k) is not None}


def flat_record(row) -> dict:
    """One flat record (for CSV): values, ``handbook_*`` and ``error_*``."""
    values = member_values(row)
    out = {"species": row.species, "level": row.level, "status": row.status, "reason": row.reason or ""}
    out.update(values)
    for k, v in row.handbook.items():
        out[f"handbook_{k}"] = v
    for k, v in signed_errors(row, values).items():
        out[f"error_{k}"] = v
    return out


def series_document(rows, title: str = "") -> dict:
    import pyscf

    from .. import __version__
    from ..pipeline import caution_for

    out_rows = []
    for r in rows:
        values = member_values(r)
        out_rows.append({
            "species": r.species,
            "level": r.level,
            "status": r.status,
            "reason": r.reason,
            "values": values,
            "handbook": r.handbook,
            "signed_errors_computed_minus_handbook": signed_errors(r, values),
            "valence_levels": list(r.valence_levels),
            "notes": list(r.notes),
        })
    return {
        "schema_version": SERIES_SCHEMA_VERSION,
        "kind": "lcao series",
        "title": title,
        "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "versions": {"lcao": __version__, "pyscf": pyscf.__version__},
        "units": "distances angstrom, wavenumbers cm-1, energies eV unless a field name says otherwise",
        "rows": out_rows,
        "handbook_source": "lcao/data/diatomic_constants.csv (Huber & Herzberg 1979; NIST Chemistry WebBook), see each row's source and checked fields",
        "caution": " ".join(dict.fromkeys(caution_for(lv) for lv in levels_of(rows))),
    }


def levels_of(rows) -> list:
    """The distinct levels of the rows, parsed (a failed row's level text may not parse)."""
    from ..errors import LcaoError
    from ..levels import parse_level

    out = []
    for text in dict.fromkeys(r.level for r in rows):
        try:
            out.append(parse_level(text))
        except LcaoError:
            continue
    return out


def series_csv(rows) -> str:
    flat = [flat_record(r) for r in rows]
    cols = []
    for rec in flat:
        for k in rec:
            if k not in cols:
                cols.append(k)
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=cols, lineterminator="\n")
    w.writeheader()
    for rec in flat:
        w.writerow({k: ("" if rec.get(k) is None else rec.get(k)) for k in cols})
    return buf.getvalue()


SERIES_WRITERS = {
    "series.json": lambda rows, title="": json_text(series_document(rows, title)).encode(),
    "series.csv": lambda rows, title="": series_csv(rows).encode(),
}
