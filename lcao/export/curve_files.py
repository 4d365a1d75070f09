"""``curve.json`` and ``points.csv`` (schema documented in the README)."""

from __future__ import annotations

import csv
import datetime as _dt
import io
import math
import os

from .io import atomic_write_bytes, json_text

CURVE_SCHEMA_VERSION = 1


def _versions() -> dict:
    import pyscf

    from .. import __version__

    return {"lcao": __version__, "pyscf": pyscf.__version__}


def curve_document(result) -> dict:
    """The ``curve.json`` document of a :class:`lcao.pipeline.CurveResult`."""
    from ..store import PROTOCOL_VERSION
    from ..methods import method_for
    from .fit_fields import fit_document
    from ..units import CODATA_SOURCE, bohr_to_angstrom

    scan = result.scan
    sp = result.species
    inst = None
    if scan.instability:
        a, b = scan.instability
        inst = {
            "last_stable_r_angstrom": float(bohr_to_angstrom(a)) if math.isfinite(a) else None,
            "first_unstable_r_angstrom": float(bohr_to_angstrom(b)),
        }
    doc = {
        "schema_version": CURVE_SCHEMA_VERSION,
        "kind": "lcao potential-energy curve",
        "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "versions": _versions(),
        "protocol_version": PROTOCOL_VERSION,
        "inputs": {
            "species": sp.label,
            "atoms": list(sp.atoms),
            "charge": sp.charge,
            "electrons": sp.n_electrons,
            "multiplicity": result.multiplicity,
            "multiplicity_source": result.multiplicity_source,
            "level": {**result.level.as_dict(), "description": method_for(result.level).describe(result.level)},
            "reference": scan.reference,
            "references": scan.references,
            "grid": result.grid.as_dict(),
        },
        "units": {"distance": "angstrom (r_angstrom) and bohr (r_bohr)", "energy": "hartree", "conversions": CODATA_SOURCE},
        "multiplicity_candidates": [t.as_dict() for t in result.candidates],
        "limit_energy_hartree": scan.limit.energy_hartree,
        "separated_atoms": scan.limit.as_dict(),
        "fragment_limit_hartree": scan.fragment_limit_hartree,
        "instability": inst,
        "points": [p.as_dict() for p in scan.points],
        "branches": {name: [p.as_dict() for p in pts if p is not None] for name, pts in scan.branches.items()},
        "sweeps": {name: [p.as_dict() for p in pts if p is not None] for name, pts in scan.sweeps.items()},
        "counts": {
            "points": len(scan.points),
            "trusted": sum(1 for p in scan.points if p.trusted),
            "computed_now": result.computed,
            "reused_from_store": result.reused,
        },
        "notes": list(scan.notes) + list(result.warnings),
        "execution": result.execution,
        "caution": result.caution,
    }
    if result.well_level is not None:
        ws = result.well_scan
        doc["well_level"] = None if ws is None else {
            "level": {**result.well_level.as_dict(),
                      "description": method_for(result.well_level).describe(result.well_level)},
            "reference": ws.reference,
            "points": [p.as_dict() for p in ws.points],
            "limit_energy_hartree": ws.limit.energy_hartree,
            "separated_atoms": ws.limit.as_dict(),
            "notes": list(ws.notes),
        }
    if result.along:
        doc["along_curve"] = list(result.along)
        doc["along_curve_orbitals"] = method_for(result.level).orbitals_note(result.level) or "the level's own"
    if result.fit is not None or result.verdict is not None:
        doc["fit"] = fit_document(result.fit, result.caution, result.verdict)
    if result.fit is None and result.fit_error:
        doc["fit_error"] = result.fit_error
        doc.setdefault("fit", None)
    if scan.spatial is not None:
        doc["spatial_symmetry"] = spatial_block(scan.spatial, result.branch)
        if doc.get("fit") is not None:
            doc["fit"]["branch"] = result.branch
            o = result.other_branch
            if o is not None:
                other = fit_document(o.fit, result.caution, o.verdict) if (o.fit is not None or o.verdict is not None) else None
                if other is not None:
                    other["branch"] = o.branch
                doc["fit"]["other_branch"] = other if other is not None else {"branch": o.branch, "fit_error": o.fit_error}
    if result.counterpoise is not None:
        corrected = {round(p.r_bohr, 8): p for p in scan.points}
        doc["counterpoise"] = {
            "method": "Boys & Bernardi (Mol. Phys. 19, 553 (1970)): each atom in the dimer's basis at every distance",
            "why": result.counterpoise_reason,
            "points": [{"r_angstrom": float(bohr_to_angstrom(r)), "bsse_hartree": b,
                        "corrected_energy_hartree": (corrected[r].energy_hartree + b) if r in corrected else None}
                       for r, b in sorted(result.counterpoise.items())],
        }
    if result.neutral is not None:
        n = result.neutral
        doc["neutral_curve"] = {"species": n.species.label, "multiplicity": n.multiplicity,
                                "limit_energy_hartree": n.limit_energy_hartree,
                                "points": [p.as_dict() for p in n.points]}
    return doc


def spatial_block(sp, follows: str) -> dict:
    """The ``spatial_symmetry`` block of ``curve.json`` (:class:`lcao.scan.assemble.SpatialBreaking`)."""
    from ..units import HARTREE_EV, bohr_to_angstrom

    return {
        "breaks": sp.what,
        "broken_branch": sp.broken_branch,
        "symmetric_branch": sp.symmetric_branch,
        "point_group": sp.point_group,
        "split_angstrom": None if sp.split is None else [float(bohr_to_angstrom(r)) for r in sp.split],
        "largest_lowering_ev": sp.largest_gap_hartree * HARTREE_EV,
        "off_symmetry_electrons": list(sp.off_symmetry),
        "off_symmetry_method": "norm of the total density's blocks between symmetry kinds, orthonormal adapted basis",
        "curve_follows": follows,
        "reference_tables_list": "symmetric",
        "symmetric_points": [p.as_dict() for p in sp.points if p is not None],
    }


POINT_COLUMNS = (
    "r_angstrom",
    "r_bohr",
    "energy_hartree",
    "converged",
    "flag",
    "branch",
    "sweep",
    "scf_cycles",
    "s2",
    "sweep_gap_hartree",
    "rescue",
    "stability",
)


def points_csv(result) -> str:
    """One row per distance (the lowest trusted solution), the columns of :data:`POINT_COLUMNS`."""
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=POINT_COLUMNS, lineterminator="\n")
    w.writeheader()
    for p in result.scan.points:
        row = p.as_dict()
        w.writerow({k: ("" if row[k] is None else row[k]) for k in POINT_COLUMNS})
    return buf.getvalue()


CURVE_WRITERS = {
    "curve.json": lambda result: json_text(curve_document(result)).encode(),
    "points.csv": lambda result: points_csv(result).encode(),
}


def write_outputs(result, out_dir, writers=None) -> list[str]:
    """Render every output first, then write each atomically; returns the paths written."""
    from .io import ensure_dir

    writers = writers or CURVE_WRITERS
    rendered = {name: fn(result) for name, fn in writers.items()}
    ensure_dir(out_dir)
    paths = []
    for name, data in rendered.items():
        path = os.path.join(os.fspath(out_dir), name)
        atomic_write_bytes(path, data)
        paths.append(path)
    return paths
