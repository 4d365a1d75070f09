"""The kinetics files of a series or a study group: every bound member's molecule with its atoms, one
``thermo-species.yaml`` and ``thermo-nasa7.txt`` per level of theory (at the folder's top for one level,
in ``kinetics-<level>/`` for a ladder, where the same molecule appears at every level)."""

from __future__ import annotations

import datetime as _dt

from ..errors import InputError


def member_sheet(row):
    """The sheet of a bound series member from its fitted curve (no new calculation), or the reason none."""
    from ..fit.verdict import BOUND, METASTABLE
    from ..sheet import build_sheet, fit_values
    from ..species import parse_species

    if row.status != "ok":
        return None, row.reason or "failed"
    if row.verdict is not None and row.verdict.kind not in (BOUND, METASTABLE):
        return None, f"verdict {row.verdict.kind}"
    if row.fit is None:
        return None, "no fit"
    if row.electronic_degeneracy is None:
        return None, f"no orbitals at the minimum ({row.orbital_error})"
    unpaired = row.orbitals.unpaired_electrons if row.orbitals is not None else None
    vals, levels = fit_values(row.fit, row.multiplicity, row.electronic_degeneracy, unpaired)
    prov = {"verdict": None if row.verdict is None else row.verdict.kind, "branch": row.branch}
    try:
        sheet = build_sheet(parse_species(row.species), row.level_spec, source="computed",
                            precomputed=(vals, prov, levels, tuple(row.notes)))
    except InputError as exc:
        return None, str(exc)
    return sheet, None


def series_kinetics(rows, phase: str) -> tuple[dict, list[str]]:
    """{relative path: bytes} of the kinetics files, and a line per member left out with the reason."""
    from ..series import level_slug
    from .kinetics_files import merge_entries, nasa7_text, species_yaml

    by_level: dict = {}
    left_out = []
    for row in rows:
        sheet, why = member_sheet(row)
        if sheet is None:
            left_out.append(f"{row.species} at {row.level}: {why}")
            continue
        by_level.setdefault(row.level, []).append(sheet)
    files = {}
    date = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
    for level, sheets in by_level.items():
        prefix = "" if len(by_level) == 1 else f"kinetics-{level_slug(level)}/"
        entries = merge_entries(s.species_set for s in sheets)
        handoff = sheets[0].handoff
        versions = sheets[0].provenance["versions"]
        name = f"{phase} at {level}"
        files[prefix + "thermo-species.yaml"] = species_yaml(entries, handoff, date, versions, name).encode()
        files[prefix + "thermo-nasa7.txt"] = nasa7_text(entries, handoff, date, versions).encode()
    return files, left_out
