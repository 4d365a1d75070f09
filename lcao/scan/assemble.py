"""From computed sweeps to a curve (pure functions, no computation).

Per distance the lowest trusted solution over the sweeps of a branch is kept (the gap between the
sweeps recorded), then the lowest over the branches (a restricted point within
:data:`BRANCH_SPLIT_HARTREE` of the unrestricted one is the same solution and stays restricted).
Points that converged but lie well above the smooth curve through their neighbours are flagged
(:func:`lcao.points.outlier_reasons`). Notes say what a user must know: a curve that misses its
separated atoms, atoms in the wrong spin states, spin contamination, flagged points, disagreeing
sweeps.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from ..points import OUTLIER_TOL_HARTREE, CurvePoint, outlier_reasons
from ..units import bohr_to_angstrom

#: unrestricted energies must lie this far below restricted ones to count as a separate branch
BRANCH_SPLIT_HARTREE = 1e-7
#: <S^2> above S(S+1) by more than this fraction (of S(S+1), at least of 0.75) at the lowest point is
#: reported as spin contamination (the usual 10 % rule of thumb)
SPIN_CONTAMINATION = 0.10


@dataclass(frozen=True)
class ScanResult:
    """Outcome of the protocol for one species, multiplicity and level.

    Attributes:
        points: per grid distance, the lowest trusted solution (or the best untrusted one, flagged,
            where none is trusted).
        branches: 'restricted' and/or 'unrestricted' -> points (None where not computed).
        sweeps: sweep name -> points of that sweep (None where not computed).
        reference: the name outputs show for the primary branch ('RHF', 'UHF', ...).
        references: branch -> name.
        instability: (last stable r, first unstable r) in bohr where the primary branch turns unstable.
        limit: the separated-atom limit at the same level (:class:`lcao.atoms.SeparatedAtoms`).
        fragment_limit_hartree: the separated atoms in the spin states a single determinant of this
            multiplicity reaches.
        computed, reused: points computed now and taken from the store.
        notes: messages worth showing to the user.
        references: branch -> the name outputs show for it.
        reference_scan: for a level computed on a reference (a correlated method on Hartree-Fock), the
            reference's own ScanResult, else None.
        spatial: see :class:`SpatialBreaking`.
    """

    points: tuple[CurvePoint, ...]
    branches: dict
    sweeps: dict
    reference: str
    instability: tuple[float, float] | None
    limit: object
    fragment_limit_hartree: float | None
    computed: int
    reused: int
    notes: tuple[str, ...] = field(default=())
    references: dict = field(default_factory=dict)
    reference_scan: object = None
    #: where the lowest solution breaks the molecule's spatial symmetry, its symmetry-adapted branch
    #: (:class:`SpatialBreaking`), else None
    spatial: object = None


#: a solution whose total density has more than this many electrons off the molecule's symmetry blocks
#: breaks its spatial symmetry (:func:`lcao.analysis.symmetry.off_symmetry_electrons`; a symmetric one
#: measures below 1e-12)
SPATIAL_BREAK_ELECTRONS = 0.01
#: the broken-symmetry solution must lie this far below the symmetry-adapted one to count as split
SPATIAL_SPLIT_HARTREE = 1e-6
#: a breaking that lowers the energy by less than this (2.7 meV) nowhere is not kept as a branch: separated
#: atoms in p^n states, for one, mix sigma and pi at long range for nothing
SPATIAL_MATTERS_HARTREE = 1e-4


@dataclass(frozen=True)
class SpatialBreaking:
    """A curve whose lowest solution breaks the molecule's spatial symmetry, and its symmetry-adapted branch.

    Attributes:
        broken_branch: the branch whose solutions break it (e.g. 'unrestricted').
        symmetric_branch: its symmetry-adapted copy (e.g. 'unrestricted-symmetric').
        point_group: the abelian group the symmetry-adapted solutions keep ('D2h', 'C2v').
        what: which symmetry breaks, in words.
        off_symmetry: per curve point, the off-symmetry electrons of its solution (None where not measured).
        split: (first, last) distance in bohr where the broken solution lies below the symmetry-adapted one
            by more than :data:`SPATIAL_SPLIT_HARTREE`, or None where it never does.
        largest_gap_hartree: the largest such lowering.
        points: the symmetry-adapted curve: per distance the symmetric branch's point where trusted, else the
            curve's.
        refined: the refinement points about the symmetry-adapted curve's minimum.
    """

    broken_branch: str
    symmetric_branch: str
    point_group: str
    what: str
    off_symmetry: tuple
    split: tuple | None
    largest_gap_hartree: float
    points: tuple
    refined: tuple = ()

    def view(self, result: "ScanResult") -> "ScanResult":
        """``result`` as if its broken branch had kept the symmetry: the symmetric curve and, in the broken
        branch's place, the symmetric branch where it is trusted."""
        sym = result.branches[self.symmetric_branch]
        old = result.branches[self.broken_branch]
        merged = tuple(s if (s is not None and s.trusted) else b for s, b in zip(sym, old))
        return replace(result, points=tuple(self.points), branches={**result.branches, self.broken_branch: merged})


def spatial_breaking(final, symmetric, off, broken_branch: str, symmetric_branch: str, group: str, what: str,
                     refined=()) -> SpatialBreaking:
    """The :class:`SpatialBreaking` of a curve ``final`` from its symmetric branch's points (same grid)."""
    split, gap = [], 0.0
    for p, q, x in zip(final, symmetric, off):
        if p is None or q is None or not (p.trusted and q.trusted) or x is None or x <= SPATIAL_BREAK_ELECTRONS:
            continue
        d = q.energy_hartree - p.energy_hartree
        if d > SPATIAL_SPLIT_HARTREE:
            split.append(p.r_bohr)
            gap = max(gap, d)
    points = tuple(q if (q is not None and q.trusted) else p for p, q in zip(final, symmetric))
    return SpatialBreaking(broken_branch, symmetric_branch, group, what, tuple(off),
                           (min(split), max(split)) if split else None, gap, points, tuple(refined))


def spatial_note(sp: SpatialBreaking, references: dict) -> str:
    """The note of a curve whose lowest solution breaks its spatial symmetry."""
    from ..units import HARTREE_EV

    broken = references.get(sp.broken_branch, sp.broken_branch)
    sym = references.get(sp.symmetric_branch, sp.symmetric_branch)
    top = max((x for x in sp.off_symmetry if x is not None), default=0.0)
    if sp.split is None:
        where = (f"its solutions carry up to {top:.2f} electrons off the symmetry, but lie no lower than the"
                 " symmetry-adapted ones")
    else:
        lo, hi = bohr_to_angstrom(sp.split[0]), bohr_to_angstrom(sp.split[1])
        where = (f"the branches split from {lo:.3f} to {hi:.3f} A, the broken one up to"
                 f" {sp.largest_gap_hartree * HARTREE_EV:.3f} eV lower")
    return (f"the lowest {broken} solution breaks the molecule's {sp.what}: {where}. Both branches are kept:"
            f" '{sp.broken_branch}' (broken symmetry, the lowest solution) and '{sp.symmetric_branch}' ({sym},"
            " symmetry-adapted). Reference tables list the symmetry-adapted solution; both are fitted, and"
            " --branch symmetric makes it the curve's")


def curve_points(found: dict, n: int, branch: str, sweep: str) -> list:
    """Points of one sweep (index -> :class:`lcao.methods.PointResult`) as CurvePoints (None where absent)."""
    out = []
    for i in range(n):
        p = found.get(i)
        if p is None:
            out.append(None)
            continue
        flag = None if p.converged else (p.reason or "not converged")
        out.append(CurvePoint(p.r_bohr, p.energy, p.converged, flag, branch, sweep, p.cycles, p.s2, None, p.rescue,
                              p.stability, dict(p.components)))
    return out


def lowest(candidates, n: int) -> list:
    """Per index, the lowest trusted point among several lists, with the spread between them."""
    out = []
    for i in range(n):
        pts = [c[i] for c in candidates if c[i] is not None]
        if not pts:
            out.append(None)
            continue
        good = [p for p in pts if p.trusted]
        gap = None
        if len(good) >= 2:
            es = [p.energy_hartree for p in good]
            gap = float(max(es) - min(es))
        best = min(good, key=lambda p: p.energy_hartree) if good else pts[0]
        out.append(replace(best, sweep_gap_hartree=gap))
    return out


def flag_outliers(points, tol: float = OUTLIER_TOL_HARTREE) -> list:
    idx = [i for i, p in enumerate(points) if p is not None]
    if len(idx) < 3:
        return list(points)
    reasons = outlier_reasons([points[i].r_bohr for i in idx], [points[i].energy_hartree for i in idx],
                              [points[i].trusted for i in idx], tol)
    out = list(points)
    for j, i in enumerate(idx):
        if reasons[j]:
            out[i] = replace(points[i], flag=reasons[j])
    return out


def reference_energy(p) -> float:
    """The energy a point's branch is chosen by: its reference component (the Hartree-Fock energy under a
    correlated level; the total energy of an SCF method)."""
    e = p.components.get("reference") if p.components else None
    return p.energy_hartree if e is None else e


def lowest_over_branches(branches: dict, n: int) -> list:
    """Per distance the trusted point of the branch whose reference is lowest (restricted kept within the
    split): the lowest solution for an SCF method, the lowest reference for a correlated one, whose
    correlated energy is not variational and may lie below the right branch's."""
    final = []
    for i in range(n):
        cands = [b[i] for b in branches.values() if b[i] is not None]
        good = [p for p in cands if p.trusted]
        if good:
            best = min(good, key=lambda p: (reference_energy(p), p.branch != "restricted"))
            rest = [p for p in good if p.branch == "restricted"]
            if rest and best.branch != "restricted" and reference_energy(rest[0]) - reference_energy(best) < BRANCH_SPLIT_HARTREE:
                best = rest[0]
            final.append(best)
        else:
            final.append(cands[0])
    return flag_outliers(final)


#: a restricted correlated energy this far below its inner neighbour's, outward past the well's minimum,
#: means the restricted branch has turned down (far above the scatter of a grid point, about 2e-7 Eh)
DIVE_HARTREE = 1e-4


def switch_index(rest_e, uns_e, start: int) -> tuple[int | None, str | None]:
    """Where a correlated curve leaves its restricted branch for the unrestricted one: the first index
    from ``start`` (where the unrestricted branch begins) at which the unrestricted energy lies below the
    restricted one ("crossed"), or at which the restricted energy falls as the bond stretches past the
    well's minimum, by more than :data:`DIVE_HARTREE` below its inner trusted neighbour ("dives": a
    single-reference method on a restricted reference failing, as CCSD(T) and MP2 do for stretched
    multiple bonds). ``rest_e``, ``uns_e``: energies per grid index, None where not known or not trusted.
    Returns (index, why), or (None, None) where neither happens over the energies given."""
    lowest = prev = None
    for i, (r, u) in enumerate(zip(rest_e, uns_e)):
        if i >= start:
            if r is not None and u is not None and u < r:
                return i, "crossed"
            if r is not None and prev is not None and prev > lowest and r < prev - DIVE_HARTREE:
                return i, "dives"
        if r is not None:
            prev = r
            lowest = r if lowest is None else min(lowest, r)
    return None, None


def switch_once(branches: dict, n: int) -> tuple[list, str | None]:
    """The curve of a level on a reference with both branches: the restricted branch through the well, the
    unrestricted one from the switch (:func:`switch_index`: where its energy first falls below the
    restricted one's, or where the restricted curve turns down) to the end; where neither happens, from
    where the unrestricted branch begins (the reference's instability). Each side of the switch is checked
    for outliers on its own (a step at the switch is said in the note, not taken for an outlier). Returns
    (points, a note on the switch).

    Neither "lowest energy" nor "lowest reference" serves a correlated level: on the restricted reference
    of a stretched bond the correlated energy dives below the right curve (CCSD(T), MP2), and the
    unrestricted reference just past its instability is spin-contaminated, so switching there puts a step
    into the well of N2 at MP2/cc-pVDZ.
    """
    rest, uns = branches["restricted"], branches["unrestricted"]
    start = next((i for i in range(n) if uns[i] is not None and uns[i].trusted), None)
    if start is None:
        return flag_outliers([r if r is not None else u for r, u in zip(rest, uns)]), None
    energy = lambda p: p.energy_hartree if p is not None and p.trusted else None  # noqa: E731
    found, why = switch_index([energy(p) for p in rest], [energy(p) for p in uns], start)
    switch = start if found is None else found
    final = []
    for i in range(n):
        first, second = (rest[i], uns[i]) if i < switch else (uns[i], rest[i])
        pick = first if (first is not None and first.trusted) else (second if second is not None and second.trusted
                                                                    else (first if first is not None else second))
        final.append(pick)
    at = final[switch].r_angstrom if final[switch] is not None else float("nan")
    r, u = rest[switch], uns[switch]
    both = r is not None and u is not None and r.trusted and u.trusted
    step = u.energy_hartree - r.energy_hartree if both else None
    steps = f", and the curve steps by {step:+.4f} Eh there" if step is not None else ""
    if why == "crossed":
        note = (f"restricted reference through the well, unrestricted from {at:.3f} A, where its energy first falls"
                " below the restricted one's")
    elif why == "dives":
        note = (f"restricted reference through the well, unrestricted from {at:.3f} A, where the restricted curve"
                " turns down as the bond stretches (the single-reference method failing on the restricted reference)"
                + (f"; the unrestricted energy lies {step:+.4f} Eh from the restricted one there"
                   if step is not None else "")
                + ": near the switch neither branch is right; a multireference level (NEVPT2) describes that stretch")
    else:
        note = (f"restricted reference through the well, unrestricted from {at:.3f} A, where the restricted reference"
                f" turns unstable: the two never cross over the grid{steps}")
    return flag_outliers(final[:switch]) + flag_outliers(final[switch:]), note


def curve_notes(final, limit_hartree: float, fragment_limit, multiplicity: int, spin_square: bool,
                open_atoms: bool = True) -> list[str]:
    """The notes of a finished curve (see the module docstring)."""
    notes = []
    n = len(final)
    trusted = [p for p in final if p.trusted]
    if trusted:
        last = trusted[-1]
        gap = last.energy_hartree - limit_hartree
        if gap > 1e-3:
            notes.append(
                f"at {last.r_angstrom:.2f} A the curve lies {gap:.4f} Eh above the separated atoms"
                + (" (a restricted curve dissociates to the wrong limit)" if last.branch == "restricted" and open_atoms
                   else "")
            )
    if fragment_limit is not None and fragment_limit > limit_hartree + 1e-6:
        notes.append(
            f"a single determinant of multiplicity {multiplicity} separates into atoms in spin states"
            f" {fragment_limit - limit_hartree:.4f} Eh above the ground-state atoms"
        )
    if trusted and spin_square:
        low = min(trusted, key=lambda p: p.energy_hartree)
        exact = (multiplicity - 1) / 2 * ((multiplicity - 1) / 2 + 1)
        if low.s2 is not None and low.s2 - exact > SPIN_CONTAMINATION * max(exact, 0.75):
            notes.append(
                f"spin contamination at the lowest point ({low.r_angstrom:.3f} A): <S^2> = {low.s2:.3f} against"
                f" S(S+1) = {exact:.3f}; the unrestricted well mixes in higher spin states, so its minimum and"
                " constants are doubtful (compare ROHF or a larger basis)"
            )
    n_flag = sum(1 for p in final if not p.trusted)
    if n_flag:
        notes.append(f"{n_flag} of {n} points are flagged and kept out of every fit")
    gaps = [p.sweep_gap_hartree for p in final if p.sweep_gap_hartree]
    if gaps and max(gaps) > 1e-4:
        notes.append(f"the sweeps disagree by up to {max(gaps):.4f} Eh; the lower is kept at each distance")
    return notes


def instability_note(plan, r_unstable_bohr: float) -> str:
    """The note of a primary branch that turns unstable where the level does not follow the other branch."""
    other = "unrestricted" if plan.primary == "restricted" else "restricted"
    return (f"the {plan.reference[plan.primary]} solution is unstable towards an {other} one beyond"
            f" {bohr_to_angstrom(r_unstable_bohr):.3f} A; use a level that follows it (HF or UHF) for a curve"
            " that dissociates correctly")


def first_unstable(points, towards: str) -> int | None:
    """The first index whose converged point is unstable towards ``towards``."""
    for i, p in enumerate(points):
        if p is not None and p.converged and p.unstable_towards == towards:
            return i
    return None



def well_points(result: ScanResult) -> tuple[list, str]:
    """(the trusted points of the well, the well branch's name).

    With both branches, the restricted one (the state Hartree-Fock tables report for a closed-shell
    singlet); for a level on a reference only its first well (:func:`first_well`): a correlated energy on
    the restricted reference of a stretched bond can dive below the well and must not be taken for it.
    Otherwise the curve's points.
    """
    branches = result.branches
    if "restricted" in branches and "unrestricted" in branches:
        if result.reference_scan is not None:
            return first_well(branches["restricted"]), "restricted"
        return [p for p in branches["restricted"] if p is not None and p.trusted], "restricted"
    well = [p for p in result.points if p.trusted]
    if not well:
        return [], "none"
    return well, min(well, key=lambda p: p.energy_hartree).branch


def first_well(points) -> list:
    """The trusted points of a branch (in grid order, None where not computed) from the start up to the
    first maximum after the first minimum, or up to the first untrusted point after that minimum."""
    out: list = []
    descending = True
    for p in points:
        if p is None or not p.trusted:
            if out and not descending:
                break
            continue
        if out and descending and p.energy_hartree >= out[-1].energy_hartree:
            descending = False
        elif out and not descending and p.energy_hartree < out[-1].energy_hartree:
            break
        out.append(p)
    return out


def fit_input(result: ScanResult, refined, isotopes, symbols):
    """The arrays the fit takes (:class:`lcao.fit.FitInput`) from a scan and its refinement points
    (the well: :func:`well_points`)."""
    import numpy as np

    from ..fit import FitInput

    branches = result.branches
    well, well_branch = well_points(result)
    low = [p for p in result.points if p.trusted]

    def branch_energies(name):  # by their references (see lowest_over_branches)
        by_r = {p.r_bohr: reference_energy(p) for p in branches.get(name, ()) if p is not None and p.trusted}
        return tuple(by_r.get(p.r_bohr, np.nan) for p in low)

    ref = [p for p in refined if p is not None and p.trusted]
    return FitInput(
        tuple(p.r_bohr for p in well), tuple(p.energy_hartree for p in well), well_branch,
        tuple(p.r_bohr for p in ref), tuple(p.energy_hartree for p in ref),
        tuple(p.r_bohr for p in low), tuple(p.energy_hartree for p in low),
        tuple(np.nan if p.s2 is None else p.s2 for p in low),
        branch_energies("restricted"), branch_energies("unrestricted"),
        bool(low) and low[-1].branch == "restricted" and "unrestricted" not in branches,
        result.limit.energy_hartree, isotopes.reduced_mass_me, isotopes, tuple(symbols),
    )
