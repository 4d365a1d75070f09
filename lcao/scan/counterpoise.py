"""The counterpoise correction of Boys and Bernardi (Mol. Phys. 19, 553 (1970)).

At every distance each separated atom is computed again in the dimer's whole basis, its partner a ghost
(basis functions without nucleus or electrons). The basis-set superposition error of the point is

    BSSE(r) = [E_A - E_A(dimer basis, r)] + [E_B - E_B(dimer basis, r)]   (>= 0),

and the corrected curve E(r) + BSSE(r) goes to the same separated atoms. A well no deeper than that
correction is no bond (verdict ``superposition-limited``). The atoms in the dimer basis are stored like
points (sweeps ``counterpoise/first`` and ``counterpoise/second``), so a rerun computes nothing.
"""

from __future__ import annotations

import asyncio
from dataclasses import replace

from ..methods.base import PointResult
from ..store import point_key

SWEEPS = ("counterpoise/first", "counterpoise/second")


async def bsse(session, method, species, target, atoms, rs, tally) -> dict:
    """round(r_bohr, 8) -> BSSE (hartree) at each distance of ``rs``; ``atoms`` are the two separated atoms
    (:class:`lcao.methods.AtomResult`) of the limit, in the species' order."""
    from .tasks import CounterpoiseTask

    level, mult = target.level, target.multiplicity
    got, todo = {}, []
    for r in dict.fromkeys(round(float(x), 8) for x in rs):
        pair = [session.stored_point(species, mult, level, name, r) for name in SWEEPS]
        if all(p is not None for p in pair):
            got[r] = pair
            for name in SWEEPS:
                tally.count(point_key(species, mult, level, name, r), False)
        else:
            todo.append(r)
    if todo:
        parts = max(1, session.executor.workers)
        size = -(-len(todo) // parts)
        chunks = [todo[k:k + size] for k in range(0, len(todo), size)]

        async def one(chunk):
            done = await session.run(CounterpoiseTask(method, level, tuple((r, atoms[0], atoms[1]) for r in chunk)))
            tally.pids.add(done.pid)
            for r, ghosts in zip(chunk, done.value):
                pair = []
                for name, g in zip(SWEEPS, ghosts):
                    p = PointResult(r, g.energy_hartree, g.converged, 0, components=dict(g.components), warm=g.warm)
                    session.commit_point(species, mult, level, name, p, tally)
                    pair.append(p)
                got[r] = pair
            session._tick("counterpoise", len(chunk))

        await asyncio.gather(*(one(c) for c in chunks))
    own = atoms[0].energy_hartree + atoms[1].energy_hartree
    return {r: (own - pair[0].energy - pair[1].energy) if (pair[0].converged and pair[1].converged) else float("nan")
            for r, pair in got.items()}


def corrected(result, refined, errors: dict):
    """The scan's points and the refinement points with the BSSE added (untrusted where it is missing)."""

    def fix(p):
        if p is None:
            return None
        b = errors.get(round(p.r_bohr, 8))
        if b is None or b != b:  # NaN: the correction failed here
            return replace(p, flag=p.flag or "no counterpoise correction here") if p.trusted else p
        comp = dict(p.components)
        comp["counterpoise"] = b
        return replace(p, energy_hartree=p.energy_hartree + b, components=comp)

    branches = {k: tuple(fix(p) for p in v) for k, v in result.branches.items()}
    return (replace(result, points=tuple(fix(p) for p in result.points), branches=branches),
            tuple(fix(p) for p in refined))
