"""Side by side: isoelectronic series, level-of-theory ladders and the handbook comparison.

A series is a list of members (species x level). Each member runs, or reuses
from the store, a full curve with orbitals and fit, and the orbital analysis
at the fitted minimum; a member that fails (a basis lacking an element, no
minimum, every point flagged) becomes a row with the reason and never stops
the others.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field

from .errors import BasisCoverageError, InputError, LcaoError, SpeciesError
from .levels import Level
from .species import Species, element_symbol, parse_species, atomic_number

log = logging.getLogger(__name__)


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


def every_pair(elements, charges) -> list[Species]:
    """Every diatomic of the element pool, homonuclear and heteronuclear, with every charge in ``charges``
    (inclusive) that leaves it electrons; neutral members first, then by charge and formula."""
    pool = list(dict.fromkeys(element_symbol(atomic_number(s)) for s in elements))
    if not pool:
        raise InputError("the element pool is empty")
    lo, hi = charges
    if lo > hi:
        raise InputError(f"charge range {lo}..{hi} is reversed")
    out = []
    for i, a in enumerate(pool):
        for b in pool[i:]:
            pair = tuple(sorted((a, b), key=atomic_number))
            for q in range(lo, hi + 1):
                try:
                    out.append(Species(pair, q))
                except SpeciesError:
                    continue
    out.sort(key=lambda s: (abs(s.charge), s.charge < 0, sum(s.z), s.label))
    return out


def parse_elements(text: str) -> list[str]:
    """'H-Ar' (a range by atomic number), 'B,C,N,O,F', or both ('H-He,C-F')."""
    out = []
    for part in (t.strip() for t in str(text).split(",")):
        if not part:
            continue
        if "-" in part:
            a, b = (x.strip() for x in part.split("-", 1))
            za, zb = atomic_number(a), atomic_number(b)
            if za > zb:
                raise InputError(f"element range {part} runs backwards")
            out += [element_symbol(z) for z in range(za, zb + 1)]
        else:
            out.append(element_symbol(atomic_number(part)))
    if not out:
        raise InputError(f"no elements in {text!r}")
    return list(dict.fromkeys(out))


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
    well_level: Level | None = None
    counterpoise: bool = False
    branch: str = "lowest"


@dataclass(frozen=True)
class OrbitalSummary:
    """What a series row keeps of the orbital analysis at the fitted minimum."""

    bond_order_mo_count: float | None
    bond_order_mayer: float
    bond_order_mulliken: float
    unpaired_electrons: int
    magnetism: str
    s2: float


@dataclass(frozen=True)
class SeriesRow:
    """The outcome of one member, typed (atomic units in ``fit``; :mod:`lcao.export.series_files`
    converts at the edge), or the reason it failed.

    Attributes:
        species, level: the member's label and level text; status: 'ok' or 'failed'; reason: why not.
        multiplicity, reference: the state computed; points, trusted_points: grid points and trusted ones.
        limit_energy_hartree: the separated atoms at the same level.
        fit: :class:`lcao.fit.CurveFit` (None when the member failed).
        orbitals: :class:`OrbitalSummary` at the fitted minimum, or None with ``orbital_error``.
        handbook: the shipped handbook row (its own units, named in its keys), or {}.
        valence_levels: per valence MO at the minimum: label, kind, spin, energy_hartree, occupation,
            formal_class.
        notes: the curve's notes and the fit's warnings.
        verdict: what the curve says (:class:`lcao.fit.verdict.Verdict`): a repulsive or unbound member is a
            result with no constants, not a failure.
        branch: the branch followed ('lowest' or 'symmetric'); spatial_broken: whether the lowest solution
            breaks the molecule's spatial symmetry (both branches were then fitted); spatial_in_well: whether
            that changes the well (:func:`lcao.outcome.branches_differ`).
        electronic_degeneracy: of the state at the minimum, from the orbitals or the CI vector (for the
            kinetics files); level_spec: the member's :class:`lcao.levels.Level`.
        files: the member's own files (name -> bytes: curve.json, points.csv, curve.svg, orbital-levels.svg),
            written to its folder (:func:`member_folder`) beside the group's table; only when the run asks
            for them (``run_series(..., member_files=True)``, as the CLI does). computed: points this run
            computed (the rest came from the store).
    """

    species: str
    level: str
    status: str
    reason: str | None = None
    multiplicity: int | None = None
    reference: str | None = None
    points: int | None = None
    trusted_points: int | None = None
    limit_energy_hartree: float | None = None
    fit: object = None
    orbitals: OrbitalSummary | None = None
    orbital_error: str | None = None
    handbook: dict = field(default_factory=dict)
    valence_levels: tuple = ()
    notes: tuple = ()
    verdict: object = None
    branch: str = "lowest"
    spatial_broken: bool = False
    spatial_in_well: bool = False
    electronic_degeneracy: int | None = None
    level_spec: object = None
    files: dict = field(default_factory=dict)
    computed: int = 0


def _handbook(species: Species) -> dict:
    from .data import handbook_row

    row = handbook_row(species.label)
    if row is None:
        return {}
    keep = ("ground_term", "multiplicity", "re_angstrom", "we_cm1", "wexe_cm1", "be_cm1", "d0_ev", "source", "checked")
    return {k: row.get(k) for k in keep}


async def run_member_async(session, member: Member, files: bool = False) -> SeriesRow:
    """Curve, fit and orbitals at the minimum of one member on a session; failures become a row with
    the reason."""
    from .masses import resolve_isotopes
    from .pipeline import curve_async, resolve_inputs
    from .single_point import orbitals_async

    sp, lv = member.species, member.level
    hb = _handbook(sp)
    try:
        sp, lv, grid = resolve_inputs(sp, lv, member.grid, member.multiplicity, None, member.points)
        if member.well_level is not None:
            resolve_inputs(sp, member.well_level, grid, member.multiplicity)
        res = await curve_async(session, sp, lv, grid, member.multiplicity, resolve_isotopes(sp.atoms),
                                analyse_points=False, well_level=member.well_level, counterpoise=member.counterpoise,
                                branch=member.branch)
    except BasisCoverageError as exc:  # the basis lacks an element: a survey lists the member as skipped
        return SeriesRow(sp.label, lv.text, "skipped", str(exc), handbook=hb, level_spec=lv)
    except LcaoError as exc:
        return SeriesRow(sp.label, lv.text, "failed", str(exc), handbook=hb)
    from .fit.verdict import BOUND, METASTABLE
    from .outcome import branches_differ

    files = member_files(res) if files else None
    common = dict(files=files or {}, computed=res.computed, multiplicity=res.multiplicity, reference=res.scan.reference, points=len(res.points),
                  trusted_points=len(res.trusted_points), limit_energy_hartree=res.limit_energy_hartree, handbook=hb,
                  verdict=res.verdict, branch=res.branch, spatial_broken=res.scan.spatial is not None,
                  spatial_in_well=branches_differ(res), level_spec=lv)
    if res.verdict is not None and res.verdict.kind not in (BOUND, METASTABLE):
        # a result: the curve says there is no bond here, and no constants are given that would invite misuse
        return SeriesRow(sp.label, lv.text, "ok", None, fit=res.fit, notes=tuple(res.scan.notes) + res.warnings,
                         orbital_error=f"no orbitals at a minimum: {res.verdict.kind}", **common)
    if res.fit is None:
        return SeriesRow(sp.label, lv.text, "failed", f"no fit: {res.fit_error}", notes=res.scan.notes, **common)
    summary, error, levels, g_el = None, None, (), None
    try:
        orb = await orbitals_async(session, sp, lv, at_minimum=True, multiplicity=res.multiplicity, grid=grid, base=res)
        a = orb.analysis
        bo = a.bond_orders()
        summary = OrbitalSummary(bo["mo_count"], bo["mayer"], bo["mulliken"], a.unpaired_electrons, a.magnetism, a.s2)
        from .sheet import degeneracy_from_orbitals

        g_el = degeneracy_from_orbitals(a, res.multiplicity)[0]
        if files is not None:
            files["orbital-levels.svg"] = _svg(orb, "levels")
        levels = tuple(
            {"label": m.label, "kind": m.kind, "spin": m.spin, "energy_hartree": m.energy_hartree,
             "occupation": m.occupation, "formal_class": m.formal_class}
            for m in a.orbitals if m.formal_class != "core"
        )
    except LcaoError as exc:
        error = str(exc)
    return SeriesRow(sp.label, lv.text, "ok", None, fit=res.fit, orbitals=summary, orbital_error=error,
                     valence_levels=levels, notes=tuple(res.scan.notes) + tuple(res.fit.warnings),
                     electronic_degeneracy=g_el, **common)


def member_folder(species: str, level: str) -> str:
    """The folder of one member inside its group's folder: ``N2_HF-6-31G``, ``NO+_CCSD-T--cc-pVTZ``."""
    return f"{species}_{level_slug(level)}"


def level_slug(level: str) -> str:
    """A level as a file name, one to one for the usual names: ``HF-6-31Gstar``, ``CCSD-T-_cc-pVTZ``."""
    import re

    text = level.replace("*", "star").replace("+", "plus").replace("/", "-").replace("(", "-").replace(")", "-")
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("-")


def _svg(result, kind: str) -> bytes:
    import io

    from .plots import plot_curve, plot_levels

    ax = (plot_curve if kind == "curve" else plot_levels)(result)
    ax.figure.tight_layout()
    buf = io.BytesIO()
    ax.figure.savefig(buf, format="svg")
    return buf.getvalue()


def member_files(res) -> dict:
    """curve.json and points.csv as `lcao curve` writes them, and the curve as SVG."""
    from .export.curve_files import CURVE_WRITERS

    files = {name: fn(res) for name, fn in CURVE_WRITERS.items()}
    files["curve.svg"] = _svg(res, "curve")
    return files


def run_series(members, store=None, *, workers: int | None = None, progress=None, executor=None,
               member_files: bool = False) -> tuple[SeriesRow, ...]:
    """Run every member (see :func:`run_member_async`); rows in member order.

    The members' curves run side by side on one executor (worker processes, dearest first). Members
    whose molecule has :data:`lcao.threads.THREADED_FROM_NAO` or more basis functions run afterwards in
    this process, one at a time, with the cores as threads.
    """
    import asyncio

    from .dispatch import expected_cost, member_basis_size, run_member_elsewhere, whole_member
    from .scan.session import open_session, run_sync
    from .threads import THREADED_FROM_NAO

    members = list(members)
    sizes = [member_basis_size(m) for m in members]
    rows: list = [None] * len(members)

    start = getattr(progress, "start_members", None)
    if start is not None:
        start(len(members))
    done = getattr(progress, "member_done", None)

    async def one(i):
        session = session_of[0]
        if session.executor.whole_members and whole_member(session.store, members[i]):
            row = await run_member_elsewhere(session, members[i], member_files)
        else:
            row = await run_member_async(session, members[i], member_files)
        rows[i] = row
        log.info("series member %s %s: %s", row.species, row.level, row.status)
        if done is not None:
            done(row.species, row.level, row.status)

    session_of: list = [None]

    async def batch(session, idx):
        idx = sorted(idx, key=lambda i: -expected_cost(members[i]))
        session_of[0] = session
        await asyncio.gather(*(one(i) for i in idx))

    small = [i for i, n in enumerate(sizes) if n < THREADED_FROM_NAO]
    large = [i for i, n in enumerate(sizes) if n >= THREADED_FROM_NAO]
    if small:
        with open_session(store, workers, 0, progress, executor) as session:
            run_sync(batch(session, small))
    for i in large:
        with open_session(store, workers, sizes[i], progress, executor) as session:
            run_sync(batch(session, [i]))
    return tuple(rows)


def members_from(species_texts, levels, grid=None, multiplicity=None, points=None, well_level=None,
                 counterpoise: bool = False, branch: str = "lowest") -> list[Member]:
    """Members for every species x level (species as text or Species); ``well_level`` computes each
    member's well and atoms at that level (:mod:`lcao.scan.well`); ``counterpoise`` and ``branch`` as for
    :func:`lcao.pipeline.curve`."""
    out = []
    for t in species_texts:
        sp = t if isinstance(t, Species) else parse_species(t)
        for lv in levels:
            out.append(Member(sp, lv, grid, multiplicity, points, well_level, counterpoise, branch))
    return out
