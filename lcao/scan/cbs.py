"""A basis-set extrapolation as a level: ``CCSD(T)/CBS(cc-pVTZ,cc-pVQZ)``.

Both component levels (``CCSD(T)/cc-pVTZ``, ``CCSD(T)/cc-pVQZ``) are computed with the protocol of a
correlated level, each stored under its own level and reused by any run that asks for it, and combined
point by point on the same grid and branches. The correlation energy is extrapolated with the
inverse-cube formula of Helgaker, Klopper, Koch and Noga (J. Chem. Phys. 106, 9639 (1997)),

    E_corr(CBS) = (X^3 E_corr(X) - Y^3 E_corr(Y)) / (X^3 - Y^3),

X < Y the cardinal numbers; the Hartree-Fock part is taken from the larger basis, not extrapolated
(its convergence is exponential, and at cc-pVQZ it is within about 1 mEh of its limit for first-row
diatomics). The refinement about the minimum is computed at both component levels at the same
distances, about the extrapolated curve's minimum.
"""

from __future__ import annotations

import asyncio
import math
from dataclasses import replace

from ..atoms import needed_states
from ..methods.base import Target
from ..points import CurvePoint
from . import assemble
from .session import Tally

HARTREE_FOCK_NOTE = "Hartree-Fock from the larger basis, not extrapolated"
CITATION = "inverse cube in the cardinal number: Helgaker, Klopper, Koch & Noga, J. Chem. Phys. 106, 9639 (1997)"


def extrapolate(e_x: float, e_y: float, x: int, y: int) -> float:
    """The inverse-cube two-point limit of correlation energies in bases of cardinal numbers x < y."""
    return (x**3 * e_x - y**3 * e_y) / (x**3 - y**3)


def combine_components(px: dict, py: dict, x: int, y: int) -> dict:
    """The components of an extrapolated point from those of its two component points."""
    return {"reference": py["reference"], "correlation": extrapolate(px["correlation"], py["correlation"], x, y),
            "reference_small_basis": px["reference"], "correlation_small_basis": px["correlation"],
            "correlation_large_basis": py["correlation"]}


def _combined(cx: CurvePoint, cy: CurvePoint, sweep: str, x: int, y: int) -> CurvePoint:
    if not (cx.trusted and cy.trusted):
        bad = cx if not cx.trusted else cy
        return CurvePoint(cy.r_bohr, float("nan"), False, f"a component is not trusted: {bad.flag}", cy.branch, sweep,
                          cx.cycles + cy.cycles)
    if cx.sweep != cy.sweep:  # one basis's restricted solution kept the symmetry here, the other's broke it
        return CurvePoint(cy.r_bohr, float("nan"), False, f"the components' references differ ({cx.sweep}, {cy.sweep})",
                          cy.branch, sweep, cx.cycles + cy.cycles)
    comp = combine_components(cx.components, cy.components, x, y)
    return replace(cy, energy_hartree=comp["reference"] + comp["correlation"], sweep=sweep, cycles=cx.cycles + cy.cycles,
                   components=comp, sweep_gap_hartree=None)


def combine_atom(ax, ay, x: int, y: int):
    comp = combine_components(ax.components, ay.components, x, y)
    return replace(ay, energy_hartree=comp["reference"] + comp["correlation"], converged=ax.converged and ay.converged,
                   components=comp)


async def scan(session, method, species, target: Target, r_all, tally: Tally, *, refine_points=True, analyse=True,
               parts=1, fitted=False):
    """As :func:`lcao.scan.protocol.scan`, for a level whose basis is ``CBS(X,Y)``."""
    from . import on_reference, protocol

    small, large, x, y = target.level.cbs
    tx = Target(target.atoms, target.charge, target.multiplicity, target.level.with_basis(small))
    ty = Target(target.atoms, target.charge, target.multiplicity, target.level.with_basis(large))
    states = needed_states(species, target.spin)
    tallies = (Tally(), Tally())
    (sx, _, _), (sy, _, _), atoms_x, atoms_y = await asyncio.gather(
        protocol.scan(session, method, species, tx, r_all, tallies[0], refine_points=False, analyse=False,
                      spatial=False, fitted=fitted),
        protocol.scan(session, method, species, ty, r_all, tallies[1], refine_points=False, analyse=False,
                      spatial=False, fitted=fitted),
        session.atoms(method, tx.level, states), session.atoms(method, ty.level, states))
    n = len(r_all)
    branches, sweeps, found = {}, {}, {}
    for branch in sx.result.branches.keys() & sy.result.branches.keys():
        name = f"{branch}/extrapolated"
        listed = []
        for cx, cy in zip(sx.result.branches[branch], sy.result.branches[branch]):
            listed.append(None if cx is None or cy is None else _combined(cx, cy, name, x, y))
        sweeps[name] = listed
        branches[branch] = assemble.flag_outliers(listed)
        raw = {}
        for i, p in enumerate(listed):
            src = protocol.raw_point(sy, sy.result.branches[branch][i]) if p is not None and p.trusted else None
            if src is not None:
                raw[i] = replace(src, energy=p.energy_hartree, components=p.components)
        found[name] = raw
    atoms = {k: combine_atom(atoms_x[k], atoms_y[k], x, y) for k in atoms_x}
    limit, frag_limit, final, notes = on_reference.correlated_final(species, target, method, atoms, branches, n)
    for t, s in ((tx, sx), (ty, sy)):
        notes += [f"{t.level.text}: {note}" for note in s.result.notes if "above the separated atoms" not in note]
    state = method.state_plan(target.level, target.multiplicity)
    result = assemble.ScanResult(
        tuple(final), {k: tuple(v) for k, v in branches.items()}, {k: tuple(v) for k, v in sweeps.items()},
        state.reference[state.primary], sy.result.instability, limit, frag_limit,
        sum(t.computed for t in tallies), sum(t.reused for t in tallies), tuple(notes), dict(state.reference),
        sy.result.reference_scan,
    )
    done = protocol.Scan(result, found, state, target)
    refined = ()
    if refine_points:
        centre = on_reference.well_minimum(result)
        if centre is not None:
            r0, nearest = centre
            nx = _component_point(sx, nearest)
            ny = _component_point(sy, nearest)
            rx, ry = await asyncio.gather(
                on_reference.refine_at(session, method, species, tx, sx, nx, r0, tallies[0]),
                on_reference.refine_at(session, method, species, ty, sy, ny, r0, tallies[1]))
            byr = {round(p.r_bohr, 8): p for p in rx}
            refined = tuple(_combined(byr[round(q.r_bohr, 8)], q, f"{nearest.branch}/refine", x, y)
                            for q in ry if round(q.r_bohr, 8) in byr)
    for t in tallies:
        tally.merge(t)
    summaries = await protocol.analyse_along(session, method, done, parts) if analyse else ()
    return done, refined, summaries


def _component_point(component_scan, point: CurvePoint) -> CurvePoint:
    for p in component_scan.result.branches.get(point.branch, ()):
        if p is not None and math.isclose(p.r_bohr, point.r_bohr, abs_tol=1e-9):
            return p
    return point
