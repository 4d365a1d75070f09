"""``series.csv`` and ``series.json`` (one record per species and level)."""

from __future__ import annotations

import csv
import datetime as _dt
import io

from .io import json_text

SERIES_SCHEMA_VERSION = 1


def series_document(rows, title: str = "") -> dict:
    import pyscf

    from .. import __version__
    from ..fit import DE_CAUTION
    from ..pipeline import CAUTION

    return {
        "schema_version": SERIES_SCHEMA_VERSION,
        "kind": "lcao series",
        "title": title,
        "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "versions": {"lcao": __version__, "pyscf": pyscf.__version__},
        "units": "distances angstrom, wavenumbers cm-1, energies eV unless a field name says otherwise",
        "rows": [
            {
                "species": r.species,
                "level": r.level,
                "status": r.status,
                "reason": r.reason,
                "values": r.values,
                "handbook": r.handbook,
                "signed_errors_computed_minus_handbook": r.errors,
                "valence_levels": list(r.valence_levels),
                "notes": list(r.notes),
            }
            for r in rows
        ],
        "handbook_source": "lcao/data/diatomic_constants.csv (Huber & Herzberg 1979; NIST Chemistry WebBook), see each row's source and checked fields",
        "caution": CAUTION + " " + DE_CAUTION,
    }


def series_csv(rows) -> str:
    flat = [r.flat() for r in rows]
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
