"""Side by side: isoelectronic series, level-of-theory ladders and the handbook comparison.

A series is a list of members (species x level). Each member runs, or reuses
from the store, a full curve with orbitals and fit, and the orbital analysis
at the fitted minimum; a member that fails (a basis lacking an element, no
minimum, every point flagged) becomes a row with the reason and never stops
the others.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field

from .errors import InputError, LcaoError, SpeciesError
from .levels import Level
from .species import Species, element_symbol, parse_species, atomic_number

log = logging.getLogger(__name__)

#: handbook columns compared with computed ones (row key, computed key)
HANDBOOK_COMPARED = (
    ("re_angstrom", "re_angstrom"),
    ("we_cm1", "we_cm1"),
    ("wexe_cm1", "wexe_cm1"),
    ("be_cm1", "be_cm1"),
    ("d0_ev", "d0_ev"),
)


def by_electron_count(n_electrons: int, elements, charges) -> list[Species]:
    """Every diatomic of the element pool with ``n_electrons`` electrons and a charge in ``charges``.

    Args:
        n_electrons: electron count (14 for N2, CO, CN-, NO+, BF, C2^2-, ...).
        elements: element symbols (the pool, e.g. B, C, N, O, F).
        charges: (lowest, highest), inclusive.

    Returns:
        Species ordered by charge magnitude, then formula (neutral members first).
    """
    if not isinstance(n_electrons, int) or isinstance(n_electrons, bool) or n_electrons < 1:
        raise InputError(f"electron count must be a positive whole number, got {n_electrons!r}")
    pool = [element_symbol(atomic_number(s)) for s in elements]
    if not pool:
        raise InputError("the element pool is empty")
    lo, hi = charges
    if lo > hi:
        raise InputError(f"charge range {lo}..{hi} is reversed")
    order = {s: atomic_number(s) for s in pool}
    out = []
    seen = set()
    for a in pool:
        for b in pool:
            za, zb = order[a], order[b]
            if za > zb or (a, b) in seen:
                continue
            seen.add((a, b))
            q = za + zb - n_electrons
            if lo <= q <= hi:
                try:
                    out.append(Species((a, b), q))
                except SpeciesError:
                    continue
    out.sort(key=lambda s: (abs(s.charge), s.charge < 0, s.label))
    if not out:
        raise InputError(
            f"no diatomic of {', '.join(pool)} has {n_electrons} electrons with a charge from {lo:+d} to {hi:+d}"
        )
    return out


def parse_charge_range(text: str) -> tuple[int, int]:
    """'-2..2' or '0' -> (lo, hi)."""
    t = str(text).strip()
    try:
        if ".." in t:
            a, b = t.split("..", 1)
            return int(a), int(b)
        return int(t), int(t)
    except ValueError:
        raise InputError(f"charge range must be written LOW..HIGH (e.g. -2..2), got {text!r}") from None


@dataclass(frozen=True)
class Member:
    """One species at one level, with its curve options."""

    species: Species
    level: Level
    grid: object = None
    multiplicity: int | None = None
    points: int | None = None


@dataclass(frozen=True)
class SeriesRow:
    """The outcome of one member: computed values, handbook values and signed errors, or the reason it failed."""

    species: str
    level: str
    status: str
    reason: str | None = None
    values: dict = field(default_factory=dict)
    handbook: dict = field(default_factory=dict)
    errors: dict = field(default_factory=dict)
    valence_levels: tuple = ()
    notes: tuple = ()

    def flat(self) -> dict:
        """One flat record with units in the field names (for CSV)."""
        out = {"species": self.species, "level": self.level, "status": self.status, "reason": self.reason or ""}
        out.update(self.values)
        for k, v in self.handbook.items():
            out[f"handbook_{k}"] = v
        for k, v in self.errors.items():
            out[f"error_{k}"] = v
        return out


def _handbook(species: Species) -> dict:
    from .data import handbook_row

    row = handbook_row(species.label)
    if row is None:
        return {}
    keep = ("ground_term", "multiplicity", "re_angstrom", "we_cm1", "wexe_cm1", "be_cm1", "d0_ev", "source", "checked")
    return {k: row.get(k) for k in keep}


def run_member(member: Member, store, progress=None) -> SeriesRow:
    """Curve, fit and orbitals at the minimum of one member; failures become a row with the reason."""
    from .pipeline import curve, orbitals, resolve_inputs

    sp, lv = member.species, member.level
    hb = _handbook(sp)
    try:
        sp, lv, grid = resolve_inputs(sp, lv, member.grid, member.multiplicity, None, member.points)
        res = curve(sp, lv, grid, multiplicity=member.multiplicity, store=store, analyse_points=False, progress=progress)
    except LcaoError as exc:
        return SeriesRow(sp.label, lv.text, "failed", str(exc), handbook=hb)
    values = {
        "multiplicity": res.multiplicity,
        "reference": res.scan.reference,
        "trusted_points": len(res.trusted_points),
        "points": len(res.points),
        "limit_energy_hartree": res.limit_energy_hartree,
    }
    if res.fit is None:
        return SeriesRow(sp.label, lv.text, "failed", f"no fit: {res.fit_error}", values, hb, notes=res.scan.notes)
    f = res.fit.as_dict()
    for key in ("re_angstrom", "re_uncertainty_angstrom", "we_cm1", "wexe_cm1", "be_cm1", "alpha_e_cm1", "de_ev", "d0_ev", "zpe_cm1", "bound"):
        values[key] = f[key]
    values["morse_de_ev"] = f["morse"]["de_ev"] if f["morse"] else None
    values["well_branch"] = f["well_branch"]
    levels = ()
    try:
        orb = orbitals(sp, lv, at_minimum=True, multiplicity=res.multiplicity, grid=grid, store=store, base=res)
        a = orb.analysis
        bo = a.bond_orders()
        values.update(
            bond_order_mo_count=bo["mo_count"],
            bond_order_mayer=bo["mayer"],
            bond_order_mulliken=bo["mulliken"],
            unpaired_electrons=a.unpaired_electrons,
            magnetism=a.magnetism,
            s2=a.s2,
        )
        levels = tuple(
            {"label": m.label, "kind": m.kind, "spin": m.spin, "energy_hartree": m.energy_hartree, "occupation": m.occupation,
             "formal_class": m.formal_class}
            for m in a.orbitals
            if m.formal_class != "core"
        )
    except LcaoError as exc:
        values["orbital_analysis_error"] = str(exc)
    errors = {}
    if hb and hb.get("multiplicity") == res.multiplicity:
        for hk, ck in HANDBOOK_COMPARED:
            if hb.get(hk) is not None and values.get(ck) is not None:
                errors[hk] = values[ck] - hb[hk]
    notes = tuple(res.scan.notes) + tuple(res.fit.warnings)
    return SeriesRow(sp.label, lv.text, "ok", None, values, hb, errors, levels, notes)


def run_series(members, store, progress=None) -> tuple[SeriesRow, ...]:
    """Run every member in order (see :func:`run_member`)."""
    rows = []
    for m in members:
        log.info("series member %s %s", m.species.label, m.level.text)
        rows.append(run_member(m, store, progress))
    return tuple(rows)


def members_from(species_texts, levels, grid=None, multiplicity=None, points=None) -> list[Member]:
    """Members for every species x level (species as text or Species)."""
    out = []
    for t in species_texts:
        sp = t if isinstance(t, Species) else parse_species(t)
        for lv in levels:
            out.append(Member(sp, lv, grid, multiplicity, points))
    return out


def table_lines(rows) -> list[str]:
    """The table printed on stdout."""
    head = (
        f"{'species':8s} {'level':14s} {'mult':>4s} {'r_e/A':>8s} {'hb r_e':>7s} {'err':>7s} {'w_e/cm-1':>9s} {'hb w_e':>7s}"
        f" {'D_e/eV':>7s} {'D_0/eV':>7s} {'hb D_0':>7s} {'BO(MO)':>6s} {'Mayer':>6s} {'unp':>3s}  magnetism / reason"
    )
    lines = [head]

    def num(v, fmt):
        width = int("".join(ch for ch in fmt.split(".")[0] if ch.isdigit()) or 0)
        if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v):
            return format(v, fmt)
        return "-".rjust(width)

    for r in rows:
        v, h, e = r.values, r.handbook, r.errors
        if r.status != "ok":
            lines.append(f"{r.species:8s} {r.level:14s} {'':>4s} {'failed: ' + (r.reason or ''):s}")
            continue
        lines.append(
            f"{r.species:8s} {r.level:14s} {v.get('multiplicity', ''):>4} {num(v.get('re_angstrom'), '8.4f')} {num(h.get('re_angstrom'), '7.4f')}"
            f" {num(e.get('re_angstrom'), '+7.4f')} {num(v.get('we_cm1'), '9.1f')} {num(h.get('we_cm1'), '7.1f')}"
            f" {num(v.get('de_ev'), '7.3f') if v.get('bound') else 'unbound':>7s} {num(v.get('d0_ev'), '7.3f')} {num(h.get('d0_ev'), '7.3f')}"
            f" {num(v.get('bond_order_mo_count'), '6.1f')} {num(v.get('bond_order_mayer'), '6.3f')} {v.get('unpaired_electrons', '-'):>3}"
            f"  {v.get('magnetism', '')}"
        )
    return lines
