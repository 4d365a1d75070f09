"""What a computed curve says: the counterpoise correction where it is due, the verdict, and the fit.

:func:`counterpoise_errors` decides whether the basis-set superposition error is computed (asked, or by
itself for rare-gas pairs and shallow wells) and computes it; :func:`with_fit` gives a
:class:`lcao.pipeline.CurveResult` its verdict (:mod:`lcao.fit.verdict`) and, where there is a well, its
fit (on the corrected curve where the correction was computed), the well level's constants and the atomic
spin-orbit term.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

#: a well shallower than this (eV) gets the counterpoise correction without being asked
AUTO_COUNTERPOISE_EV = 0.05
RARE_GASES = ("He", "Ne", "Ar", "Kr", "Xe", "Rn")


async def counterpoise_errors(session, method, sp, target, result, refined, asked: bool, tally):
    """(BSSE per distance or None, why it was computed or why not): asked, or by itself for a rare-gas pair
    or a well shallower than :data:`AUTO_COUNTERPOISE_EV`."""
    from .scan import counterpoise
    from .units import HARTREE_EV

    good = [p for p in result.points if p.trusted]
    if not good:
        return None, None
    depth = (result.limit.energy_hartree - min(p.energy_hartree for p in good)) * HARTREE_EV
    if asked:
        why = "asked for (--counterpoise)"
    elif all(a in RARE_GASES for a in sp.atoms):
        why = "turned on by itself: a rare-gas pair"
    elif 0 < depth < AUTO_COUNTERPOISE_EV:
        why = f"turned on by itself: the well is {depth * 1000:.1f} meV deep, shallower than {AUTO_COUNTERPOISE_EV * 1000:g} meV"
    else:
        return None, None
    rs = [p.r_bohr for p in good] + [p.r_bohr for p in refined if p.trusted]
    try:
        errors = await counterpoise.bsse(session, method, sp, target, result.limit.atoms, rs, tally)
    except NotImplementedError:
        return None, f"no counterpoise correction: {target.level.method} gives none"
    return errors, why


@dataclass(frozen=True)
class BranchFit:
    """The fit of the branch a curve does not follow, where its lowest solution breaks the molecule's
    spatial symmetry (:class:`lcao.scan.assemble.SpatialBreaking`).

    Attributes:
        branch: 'lowest' or 'symmetric'; fit, fit_error, verdict: as on :class:`lcao.pipeline.CurveResult`.
    """

    branch: str
    fit: object
    fit_error: str | None
    verdict: object


def branch_fit(result, scan, refined) -> BranchFit:
    """The fit of ``result`` with the other branch's curve ``scan`` and refinement points (the well level, where
    there is one, stays the curve's)."""
    other = with_fit(replace(result, scan=scan, refined=tuple(refined), well_level=None, well_scan=None))
    return BranchFit("symmetric" if result.branch == "lowest" else "lowest", other.fit, other.fit_error, other.verdict)


def branches_differ(result) -> bool:
    """Whether the two branches of a curve whose lowest solution breaks the spatial symmetry give different
    wells (another verdict, or minima more than 1e-4 A apart): where the breaking stays outside the well,
    both fits are the same."""
    o = result.other_branch
    if o is None:
        return False
    kinds = (None if result.verdict is None else result.verdict.kind, None if o.verdict is None else o.verdict.kind)
    if kinds[0] != kinds[1] or (result.fit is None) != (o.fit is None):
        return True
    return result.fit is not None and abs(result.fit.local.re - o.fit.local.re) > 1e-4 / 0.529177210903


def _verdict(result, scan, classify):
    """The verdict of the curve (the counterpoise-corrected energies and the neutral's beside it; the well
    branch's own minima count too, see :func:`lcao.fit.verdict.classify`)."""
    from .fit.verdict import local_minima
    from .scan.assemble import well_points

    good = [p for p in result.scan.points if p.trusted]
    if len(good) < 3:
        return None
    limit = result.scan.limit.energy_hartree
    source, fixed_source = result.scan, scan
    if result.well_scan is not None:  # the well's own level decides whether it is bound
        pts = [p for p in result.well_scan.points if p.trusted]
        if len(pts) >= 3 and local_minima([p.energy_hartree for p in pts]):
            good, limit, source, fixed_source = pts, result.well_scan.limit.energy_hartree, None, None
    r = [p.r_bohr for p in good]
    e = [p.energy_hartree for p in good]
    fixed = {round(p.r_bohr, 8): p.energy_hartree for p in scan.points if p.trusted}

    def corrected_at(xs):
        return None if result.counterpoise is None else [fixed.get(round(x, 8), float("nan")) for x in xs]

    others = ()
    if source is not None:
        well, _ = well_points(source)
        if len(well) >= 3:
            wr = [p.r_bohr for p in well]
            wfixed = {round(p.r_bohr, 8): p.energy_hartree for p in well_points(fixed_source)[0]}
            others = ((wr, [p.energy_hartree for p in well],
                       None if result.counterpoise is None else [wfixed.get(round(x, 8), float("nan")) for x in wr]),)
    neutral = None
    if result.neutral is not None:
        by_r = {round(p.r_bohr, 8): p.energy_hartree for p in result.neutral.points if p.trusted}
        neutral = [by_r.get(round(x, 8), float("nan")) for x in r]
    return classify(r, e, limit, corrected_at(r) if source is not None else None, neutral, others)


def with_fit(result, well_points=None):
    from .errors import FitError
    from .fit import fit_curve, with_well_level
    from .fit.spin_orbit import correction
    from .fit.verdict import REPULSIVE, classify
    from .scan.assemble import fit_input

    scan, refined = result.scan, result.refined
    if result.counterpoise is not None:
        from .scan.counterpoise import corrected

        scan, refined = corrected(scan, refined, result.counterpoise)
    verdict = _verdict(result, scan, classify)
    result = replace(result, verdict=verdict)
    if verdict is not None and verdict.kind == REPULSIVE:
        return result  # a result, not a failure: no constants that would invite misuse
    try:
        f = fit_curve(fit_input(scan, refined, result.isotopes, result.species.atoms))
    except FitError as exc:
        return replace(result, fit_error=str(exc))
    if result.well_level is not None:
        if not well_points:
            return replace(result, fit_error=f"no trusted points of the well at {result.well_level.text}")
        try:
            f = with_well_level(f, [p.r_bohr for p in well_points], [p.energy_hartree for p in well_points],
                                result.well_scan.limit.energy_hartree, result.well_level.text, result.level.text)
        except FitError as exc:
            return replace(result, fit_error=f"the well at {result.well_level.text}: {exc}")
    limit = result.well_scan.limit if result.well_scan is not None else result.scan.limit
    return replace(result, fit=replace(f, spin_orbit=correction([(a.symbol, a.charge) for a in limit.atoms])),
                   verdict=verdict_of_fit(verdict, f))


def verdict_of_fit(verdict, fit):
    """A bound verdict worded with the fitted well's D_e (the fit's branch: the restricted well of a
    closed-shell molecule, whose minimum the grid's lowest curve may not show), so the two never disagree."""
    from .fit.verdict import BOUND
    from .units import HARTREE_EV

    if verdict is None or verdict.kind != BOUND:
        return verdict
    if fit.de is not None:
        return replace(verdict, de_hartree=float(fit.de),
                       detail=f"bound: D_e {fit.de * HARTREE_EV:.3f} eV against the separated atoms ({fit.well_branch}"
                              " well, fitted)")
    if fit.minimum_above_limit is not None:
        return replace(verdict, detail=verdict.detail + f"; the {fit.well_branch} well the fit takes lies"
                                                        f" {fit.minimum_above_limit * HARTREE_EV:.3f} eV above them")
    return verdict


