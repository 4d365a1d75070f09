"""How a series' members go to the executor: their expected cost (the dearest start first), their basis
size (large members run one at a time with threads), and, on a cluster, cheap members as one task each
(:class:`lcao.scan.tasks.MemberTask`), their points committed here when the task comes back."""

from __future__ import annotations

from .errors import LcaoError
from .series import Member, SeriesRow


def _estimate(member: Member) -> tuple[int, int, float]:
    """(grid points, multiplicities to probe, the method's estimate of one point in seconds; 0 for a member
    that will fail as a row, such as a basis lacking an element)."""
    from .methods import method_for
    from .methods.base import Target

    sp, lv = member.species, member.level
    points = len(member.grid.r_bohr) if member.grid is not None else (member.points or 40)
    probes = 1 if member.multiplicity is not None else len(sp.multiplicity_candidates())
    try:
        m = method_for(lv)
        each = m.seconds_per_point(m.basis_size(Target(sp.atoms, sp.charge, sp.lowest_multiplicity(), lv)))
    except Exception:  # noqa: BLE001 - the member fails later, as a row with the reason
        each = 0.0
    return points, probes, each


def expected_cost(member: Member) -> float:
    """A rough relative cost of a member, to start the dearest first (the executor takes tasks in
    order, so the cheap ones fill the gaps at the end): more points, more sweeps from the atoms (one
    per charge placement) and more candidate multiplicities to probe cost more."""
    from .atoms import charge_placements

    points, probes, each = _estimate(member)
    return points * (1 + len(charge_placements(member.species))) * (1 + 0.3 * probes) * max(each, 1e-3)


#: a member whose curve is expected to take less than this (seconds, by the method's own estimate) goes to a
#: cluster as one task (:func:`whole_member`)
WHOLE_MEMBER_SECONDS = 60.0


def whole_member(store, member: Member) -> bool:
    """Whether a member goes to a cluster as one task: a cheap level (Hartree-Fock or DFT in a small basis, by
    :data:`WHOLE_MEMBER_SECONDS`), no well level, and nothing of the species in the store yet (a member the
    store already has part of runs point by point, so that only what is missing is computed)."""
    if member.well_level is not None or store.has_species(member.species):
        return False
    return expected_seconds(member) < WHOLE_MEMBER_SECONDS


def expected_seconds(member: Member) -> float:
    """A member's curve by the method's estimate of a point: its grid, the sweeps (about three points per
    distance), and a probe per candidate multiplicity."""
    points, probes, each = _estimate(member)
    return 3 * points * each * (1 + 0.3 * probes)


async def run_member_elsewhere(session, member: Member, files: bool = False) -> SeriesRow:
    """A member as one task (:class:`lcao.scan.tasks.MemberTask`); the points and atoms it computed are
    committed here, to this session's store, when it comes back."""
    from .scan.tasks import MemberTask

    done = await session.run(MemberTask(member, files, session.executor.describe()))
    row, points, atoms = done.value
    for species, multiplicity, level, sweep, point in points:
        session.store.put_point(species, multiplicity, level, sweep, point)
    for state, level in atoms:
        session.store.put_atom(state, level)
    session.progress_tick("member points", len(points))
    return row


def member_basis_size(member: Member) -> int:
    """Basis functions of a member's molecule (0 when its basis lacks an element: it fails as a row)."""
    from .levels import check_basis_covers
    from .pipeline import basis_size

    try:
        check_basis_covers(member.level, member.species.atoms)
        return basis_size(member.species, member.level)
    except LcaoError:
        return 0
