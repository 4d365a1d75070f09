"""The state-following scan protocol.

For an unrestricted (or restricted open-shell) curve, two kinds of sweep:

* ``from-equilibrium``: starts at the grid point nearest the expected bond
  length from PySCF's default guess, goes outward to the last point and then
  inward to the first, each point warm-started from the previous one;
* ``from-atoms``: starts at the last point from a separated-fragment guess
  (unrestricted atoms, one atom's spin flipped where the requested spin needs
  it) and goes inward; for ions there is one such sweep per charge placement.

Every point climbs the rescue ladder when it does not converge and is
stability-followed until internally stable. The lower converged energy of the
sweeps is kept at each distance, and the gap between them is recorded.

A closed-shell singlet under ``HF`` follows the restricted solution with one
warm-started sweep and checks at every point whether it is unstable towards an
unrestricted one. From the first unstable point outward it also computes the
broken-symmetry unrestricted branch (a sweep outward from the instability and
one inward from the atoms). Both branches are kept and labelled.

Each sweep is one or two :class:`SweepTask` chains (the sweep from equilibrium
runs as its outward half and its inward half, the latter seeded with the first
point of the former); :meth:`_Runner.sweeps` runs independent tasks in this
process or in forked ones (:mod:`lcao.scan.workers`) with the same results.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field, replace

import numpy as np

from ..atoms import AtomCache, SeparatedAtoms, fragment_guesses, needed_states, separated_atoms
from ..points import CurvePoint, outlier_reasons
from ..store import StoredPoint, point_key
from ..units import bohr_to_angstrom
from .grid import Grid, expected_bond_length_bohr
from .scf import INTEGRALS, ORBITALS, build_molecule, orbitals_of, solve, solver_for, unstable_towards_uhf

log = logging.getLogger(__name__)

#: Unrestricted energies must lie this far below restricted ones to count as a separate branch.
BRANCH_SPLIT_HARTREE = 1e-7
#: <S^2> above S(S+1) by more than this fraction (of S(S+1), at least of 0.75) at the lowest point
#: is reported as spin contamination (the usual 10 % rule of thumb)
SPIN_CONTAMINATION = 0.10


@dataclass(frozen=True)
class MultiplicityTrial:
    """Energy of one candidate multiplicity at the probe distance."""

    multiplicity: int
    energy_hartree: float
    converged: bool
    reference: str
    r_bohr: float

    def as_dict(self) -> dict:
        return {
            "multiplicity": self.multiplicity,
            "energy_hartree": self.energy_hartree if math.isfinite(self.energy_hartree) else None,
            "converged": self.converged,
            "reference": self.reference,
            "r_angstrom": float(bohr_to_angstrom(self.r_bohr)),
        }


@dataclass(frozen=True)
class ScanResult:
    """Raw outcome of the protocol for one species, multiplicity and level.

    Attributes:
        points: per grid distance, the lowest trusted solution (or the best
            untrusted one, flagged, where none is trusted).
        branches: 'restricted' and/or 'unrestricted' -> points (None where the
            branch was not computed).
        sweeps: sweep name -> points of that sweep (None where not computed).
        reference: the primary SCF reference ('RHF', 'UHF', 'ROHF').
        instability: (last stable r, first unstable r) in bohr where a
            restricted solution turns unstable towards an unrestricted one.
        limit: the separated-atom limit at the same level.
        fragment_limit_hartree: energy of the separated atoms in the spin
            states a single determinant of this multiplicity reaches.
        computed, reused: points computed now and taken from the store.
        notes: messages worth showing to the user.
    """

    points: tuple[CurvePoint, ...]
    branches: dict
    sweeps: dict
    reference: str
    instability: tuple[float, float] | None
    limit: SeparatedAtoms
    fragment_limit_hartree: float | None
    computed: int
    reused: int
    notes: tuple[str, ...] = field(default=())


class _Runner:
    """Computes or recalls points, one sweep at a time, committing each to the store."""

    def __init__(self, species, multiplicity, level, store, progress=None):
        self.species = species
        self.multiplicity = multiplicity
        self.spin = multiplicity - 1
        self.level = level
        self.store = store
        self.progress = progress
        self.computed = 0
        self.reused = 0
        self.fresh: set = set()  # (sweep, r) of the points computed (not reused) by this runner

    def point(self, sweep: str, r: float, reference: str, dm0, check_uhf: bool = False) -> StoredPoint:
        got = self.store.get_point(self.species, self.multiplicity, self.level, sweep, r)
        if got is not None:
            self.reused += 1
            self._tick(sweep, r)
            return got
        mol = build_molecule(self.species.atoms, r, self.level, self.species.charge, self.spin)
        if dm0 is not None and np.asarray(dm0).shape[-1] != mol.nao:
            dm0 = None
        if dm0 is not None and reference == "RHF" and np.asarray(dm0).ndim == 3:
            dm0 = np.asarray(dm0).sum(axis=0)
        sol = solver_for(self.level)(mol, reference, dm0)
        extra = {}
        if check_uhf and sol.converged:
            unstable, _ = unstable_towards_uhf(sol.scf)
            extra["uhf_unstable"] = bool(unstable)
        orb = orbitals_of(sol.scf) if sol.converged and sol.scf is not None else None
        p = StoredPoint(r, sol.energy, sol.converged, sol.cycles, sol.s2, sol.rescue, sol.stability, sol.reason, extra,
                        sol.dm, orb)
        self.store.put_point(self.species, self.multiplicity, self.level, sweep, p)
        ORBITALS.put(point_key(self.species, self.multiplicity, self.level, sweep, r), orb)
        self.computed += 1
        self.fresh.add((sweep, r))
        log.debug("%s %s r=%.4f bohr E=%.8f conv=%s cycles=%d", self.species.label, sweep, r, sol.energy, sol.converged, sol.cycles)
        self._tick(sweep, r)
        return p

    def _tick(self, sweep, r):
        if self.progress is not None:
            self.progress(sweep, r)

    def chain(self, sweep, r_all, indices, reference, dm_start, out: dict, check_uhf=False, seed=None):
        """Points along ``indices``, each warm-started from the last converged one.

        ``seed`` is an index whose point (from ``out``, the store, or computed from ``dm_start``)
        starts the chain without being part of it, e.g. the first point of a sweep's other half.
        """
        history: list = []  # (r, density) of the last converged points on one solution

        def remember(p):
            if not p.converged:
                return
            if p.stability not in ("stable", "not checked") or p.cycles > SMOOTH_CYCLES:
                # the point moved to another solution, or the solution changes fast here: no
                # extrapolation across (it would overshoot, and can land on another solution)
                history.clear()
            history.append((p.r_bohr, p.dm))
            del history[:-EXTRAPOLATION_POINTS]

        def start_for(r):
            if not history:
                return dm_start
            return extrapolated_density(history, r)

        if seed is not None:
            p = out.get(seed)
            if p is None:
                p = self.point(sweep, r_all[seed], reference, dm_start, check_uhf)
                out[seed] = p
            remember(p)
        for i in indices:
            _take_integrals()
            p = self.point(sweep, r_all[i], reference, start_for(r_all[i]), check_uhf)
            out[i] = p
            remember(p)
        return out

    def send_integrals(self, r_all, indices, skip: set) -> None:
        """Side work of a forked child (:class:`IntegralsTask`): the integral sets of ``indices`` in
        order, each sent to the parent as soon as it is computed, except those in ``skip``."""
        from .workers import send_side_work

        for i in indices:
            mol = build_molecule(self.species.atoms, r_all[i], self.level, self.species.charge, self.spin)
            key = INTEGRALS.key(mol)
            if key not in skip:
                send_side_work((key, INTEGRALS.get(mol), INTEGRALS.one_electron_set(mol)))

    def prefetch_integrals(self, r_all, sweep_names, workers: int) -> int:
        """Integrals of the distances where one of ``sweep_names`` has no stored point, computed over
        ``workers`` processes before the sweeps (:meth:`lcao.scan.scf.IntegralCache.prefetch`)."""
        if workers < 2:
            return 0
        missing = [r for r in r_all if any(
            self.store.get_point(self.species, self.multiplicity, self.level, name, r) is None for name in sweep_names)]
        mols = [build_molecule(self.species.atoms, r, self.level, self.species.charge, self.spin) for r in missing]
        return INTEGRALS.prefetch(mols, workers)

    def sweeps(self, r_all, tasks, workers: int = 1) -> dict:
        """Run independent sweeps; returns sweep name -> {index: StoredPoint}.

        With ``workers`` > 1 and a fork possible (:mod:`lcao.scan.workers`) the tasks are
        balanced over this process and forked children; otherwise they run here in order.
        Both give the same points.
        """
        from .workers import balance, fork_possible, run_groups

        out: dict = {}
        side = [t for t in tasks if isinstance(t, IntegralsTask)]
        tasks = [t for t in tasks if not isinstance(t, IntegralsTask)]
        if workers > 1 and len(tasks) > 1 and fork_possible(workers):
            groups = balance(tasks, [_task_size(t) for t in tasks], workers)
        else:
            groups = [list(tasks)]
        if len(groups) > 1:
            groups[-1] += side  # side work is for a child, once its own tasks are done
        if len(groups) == 1:
            self._run_group(groups[0], False, r_all, out)
            return out
        results = run_groups(groups, lambda g, child: self._run_group(g, child, r_all, {} if child else out))
        for got, computed, reused, fresh, integrals in results[1:]:
            self.computed += computed
            self.reused += reused
            INTEGRALS.add_sets(integrals)
            if AtomsTask.KEY in got:
                out[AtomsTask.KEY] = got.pop(AtomsTask.KEY)
            if JobsTask.KEY in got:
                out.setdefault(JobsTask.KEY, {}).update(got.pop(JobsTask.KEY))
            for name, pts in got.items():
                mine = out.setdefault(name, {})
                for i, pt in sorted(pts.items()):
                    if i in mine:
                        # a seed both sides computed or reused: the same point, counted once
                        if (name, pt.r_bohr) in fresh:
                            self.computed -= 1
                        else:
                            self.reused -= 1
                        continue
                    self.store.put_point(self.species, self.multiplicity, self.level, name, pt)
                    ORBITALS.put(point_key(self.species, self.multiplicity, self.level, name, pt.r_bohr), pt.orbitals)
                    mine[i] = pt
                    self._tick(name, pt.r_bohr)
        return out

    def _run_group(self, group, in_child: bool, r_all, out: dict):
        runner = self
        if in_child:
            from ..store import MemoryStore, Store

            store = MemoryStore() if isinstance(self.store, MemoryStore) or not hasattr(self.store, "path") \
                else Store(self.store.path, reuse=self.store.reuse)
            runner = _Runner(self.species, self.multiplicity, self.level, store)
            inherited = INTEGRALS.kept_keys()
        for t in group:
            if isinstance(t, AtomsTask):
                cache = AtomCache(self.level, runner.store)
                out[AtomsTask.KEY] = [cache.get(*k) for k in t.states]
                continue
            if isinstance(t, JobsTask):
                out.setdefault(JobsTask.KEY, {})[t.first] = [t.fn(job) for job in t.jobs]
                continue
            if isinstance(t, IntegralsTask):
                if in_child:
                    from .workers import after_result

                    after_result(lambda t=t, skip=frozenset(inherited): runner.send_integrals(r_all, t.indices, skip))
                continue
            got = out.setdefault(t.name, {})
            runner.chain(t.name, r_all, t.indices, t.reference, t.dm0, got, t.check_uhf, t.seed)
        if in_child:
            runner.store.close()
            # the integral sets computed here go back too: the next stage's sweeps visit these
            # distances again (the unrestricted sweeps of a closed-shell curve, inside the
            # instability, those of the restricted sweep's inward half)
            sets = INTEGRALS.export(INTEGRALS.kept_keys() - inherited, HANDBACK_BYTES)
            return out, runner.computed, runner.reused, runner.fresh, sets
        return out, 0, 0, set(), []


#: two-electron integrals a forked sweep sends back at most (12 sets of N2 in 6-31G are 1.4 MB)
HANDBACK_BYTES = 32 * 2**20


def _task_size(task) -> float:
    """Rough cost in sweep points: an atom state from scratch costs about three."""
    if isinstance(task, AtomsTask):
        return 3.0 * len(task.states)
    if isinstance(task, JobsTask):
        return task.weight * len(task.jobs)
    return len(task.indices) + (task.seed is not None)


@dataclass(frozen=True)
class AtomsTask:
    """The separated-atom states a curve needs, computed beside a sweep (see run_protocol)."""

    KEY = "__atoms__"
    states: tuple


@dataclass(frozen=True)
class JobsTask:
    """Independent jobs run beside the sweeps of a stage, e.g. the orbital analysis along the curve
    beside the refinement; ``fn(job)`` per job, results in ``out[JobsTask.KEY][first]``."""

    KEY = "__jobs__"
    fn: object
    jobs: tuple
    first: int = 0
    #: cost of one job in sweep points
    weight: float = 0.25


@dataclass(frozen=True)
class IntegralsTask:
    """Side work for the process running a long sweep: a forked child that is done with its own
    tasks computes the integral sets of ``indices`` (the far end of that sweep first) and sends
    each at once; the sweep takes them between its points (:func:`_take_integrals`). Dropped
    when the tasks run in one process."""

    indices: tuple


def _take_integrals() -> None:
    """Keep the integral sets forked children have sent so far (:class:`IntegralsTask`)."""
    from .workers import take_side_work

    INTEGRALS.add_sets(take_side_work())


@dataclass(frozen=True)
class SweepTask:
    """One chain of a sweep: ``indices`` in order, started from ``seed``'s point or ``dm0``."""

    name: str
    indices: tuple
    reference: str
    dm0: object = None
    check_uhf: bool = False
    seed: int | None = None


#: converged points of a chain that the next starting density is extrapolated from: over seven
#: closed- and open-shell curves in STO-3G and 6-31G (N2, NO, O2, CO, CN-, BF, NO+), two points
#: took 12388 SCF cycles in all, three 11203, four 10712, five 11392, six 12066
EXTRAPOLATION_POINTS = 4
#: a point that took more SCF cycles than this starts the next one from its own density, not from
#: an extrapolation. Without it (CO, HF/STO-3G) the sweep from the instability, extrapolated through
#: a region of 20-50 cycles near 2 A, landed on a higher solution at three distances; with it the
#: sweeps agree again. The seven curves above took 10224 cycles with 8 here, 10489 with 12, 10449
#: with 20.
SMOOTH_CYCLES = 8


def extrapolated_density(history, r: float):
    """Lagrange extrapolation of the AO density from earlier points ``[(r, dm), ...]`` to ``r``.

    The AO basis moves with the nuclei, so the density matrix varies smoothly with the distance;
    through the last m points the guess is accurate to order m in the step (a polynomial of
    degree below m is reproduced exactly). One point gives its density unchanged.
    """
    rs = [float(x) for x, _ in history]
    dms = [np.asarray(d) for _, d in history]
    if len(history) == 1 or len(set(rs)) < len(rs) or any(d.shape != dms[-1].shape for d in dms):
        return dms[-1]
    out = np.zeros_like(dms[-1])
    for j, (rj, dj) in enumerate(zip(rs, dms)):
        w = 1.0
        for m, rm in enumerate(rs):
            if m != j:
                w *= (r - rm) / (rj - rm)
        out += w * dj
    return out


def instability_start(runner: _Runner, r: float, stored: StoredPoint):
    """Unrestricted starting density along the RHF -> UHF instability at ``r``.

    From the point's orbitals when it was computed in this run (the same direction its own check
    found, whichever process computed it), else from its density re-converged.
    """
    from .scf import make_scf

    mol = build_molecule(runner.species.atoms, r, runner.level, runner.species.charge, 0)
    orb = stored.orbitals
    if orb is not None and np.asarray(orb[1]).ndim == 2:
        mf = make_scf(mol, "RHF")
        mf.mo_energy, mf.mo_coeff, mf.mo_occ = orb
    else:
        mf = solve(mol, "RHF", stored.dm, follow_stability=False).scf
    unstable, dm = unstable_towards_uhf(mf)
    return dm if unstable else None


def _as_curve_points(stored: dict, n: int, branch: str, sweep: str, reference: str):
    out = []
    for i in range(n):
        p = stored.get(i)
        if p is None:
            out.append(None)
            continue
        flag = None if p.converged else (p.reason or "not converged")
        out.append(
            CurvePoint(p.r_bohr, p.energy, p.converged, flag, branch, sweep, p.cycles, p.s2, None, p.rescue, p.stability)
        )
    return out


def _lowest(candidates, n):
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
        if good:
            best = min(good, key=lambda p: p.energy_hartree)
        else:
            best = pts[0]
        out.append(replace(best, sweep_gap_hartree=gap))
    return out


def _flag_outliers(points):
    idx = [i for i, p in enumerate(points) if p is not None]
    if len(idx) < 3:
        return points
    r = [points[i].r_bohr for i in idx]
    e = [points[i].energy_hartree for i in idx]
    ok = [points[i].trusted for i in idx]
    reasons = outlier_reasons(r, e, ok)
    out = list(points)
    for j, i in enumerate(idx):
        if reasons[j]:
            out[i] = replace(points[i], flag=reasons[j])
    return out


#: probe distances for the multiplicity choice, as fractions of the expected bond length: the sum
#: of covalent radii overestimates multiple and ionic bonds (N2 1.42 A against 1.10 A, LiF 1.85 against 1.56)
PROBE_FACTORS = (0.8, 0.9, 1.0)


def probe_multiplicities(species, level, candidates, store, r_bohr, progress=None):
    """Lowest energy of each candidate multiplicity over the probe distances PROBE_FACTORS x ``r_bohr``.

    Returns:
        (trials, computed, reused): one trial per multiplicity (its lowest energy and where), and
        the points computed now or reused.
    """
    trials = []
    computed = reused = 0
    for mult in candidates:
        runner = _Runner(species, mult, level, store, progress)
        best = None
        for factor in PROBE_FACTORS:
            r = r_bohr * factor
            ref = level.resolved_reference(mult)
            if ref == "RHF":
                p = runner.point("probe/restricted", r, "RHF", None, check_uhf=level.reference == "auto")
                e, conv = p.energy, p.converged
                if p.extra.get("uhf_unstable"):
                    dm = instability_start(runner, r, p)
                    q = runner.point("probe/unrestricted", r, "UHF", dm)
                    if q.converged and (not conv or q.energy < e):
                        e, conv, ref = q.energy, True, "UHF"
            else:
                p = runner.point(f"probe/{ref.lower()}", r, ref, None)
                e, conv = p.energy, p.converged
            trial = MultiplicityTrial(mult, e, conv, ref, r)
            if conv and math.isfinite(e) and (best is None or not best.converged or e < best.energy_hartree):
                best = trial
            elif best is None:
                best = trial
        trials.append(best)
        computed += runner.computed
        reused += runner.reused
    return tuple(trials), computed, reused


def choose_multiplicity(trials) -> int:
    good = [t for t in trials if t.converged and math.isfinite(t.energy_hartree)]
    if not good:
        from ..errors import CalculationError

        raise CalculationError("no candidate multiplicity converged at the probe distance")
    return min(good, key=lambda t: t.energy_hartree).multiplicity


def run_protocol(species, multiplicity, level, grid: Grid, store, progress=None, workers: int = 1) -> ScanResult:
    """Run the scan protocol (see the module docstring) and assemble the curve.

    Args:
        species, multiplicity, level, grid: what to compute.
        store: a :class:`lcao.store.Store`; points found there are reused.
        progress: optional callable(sweep, r_bohr) called after each point.
        workers: processes for independent sweeps (:meth:`_Runner.sweeps`); 1 runs them in turn.
    """
    r_all = list(grid.r_bohr)
    n = len(r_all)
    reference = level.resolved_reference(multiplicity)
    runner = _Runner(species, multiplicity, level, store, progress)
    cache = AtomCache(level, store)
    # a closed-shell HF curve needs the atoms only after its restricted sweep: they are computed
    # beside its shorter inward half (in a forked process when there is one), else first
    atoms_beside = reference == "RHF" and level.reference == "auto"
    if not atoms_beside:
        limit = separated_atoms(species, cache)
        guesses = fragment_guesses(species, multiplicity - 1, cache)
    re_guess = expected_bond_length_bohr(*species.z)
    i0 = int(np.argmin([abs(x - re_guess) for x in r_all]))
    notes = []
    sweeps: dict[str, list] = {}
    branches: dict[str, list] = {}
    instability = None

    def from_equilibrium_tasks(branch, ref, check_uhf=False):
        name = f"{branch}/from-equilibrium"
        out = SweepTask(name, tuple(range(i0, n)), ref, None, check_uhf)
        inward = SweepTask(name, tuple(range(i0 - 1, -1, -1)), ref, None, check_uhf, seed=i0)
        return [out] + ([inward] if i0 > 0 else [])

    def record(name, got, branch, ref):
        sweeps[name] = _as_curve_points(got, n, branch, name, ref)
        return sweeps[name]

    if reference == "RHF":
        auto = level.reference == "auto"
        tasks = from_equilibrium_tasks("restricted", "RHF", check_uhf=True)
        if atoms_beside:
            tasks.append(AtomsTask(tuple(needed_states(species, multiplicity - 1))))
        # the outward half is the longest chain: the child with the short inward half computes its
        # integrals from the far end once done (an open-shell curve has them all beforehand)
        if INTEGRALS.keeps(build_molecule(species.atoms, r_all[-1], level, species.charge, runner.spin)):
            tasks.append(IntegralsTask(tuple(range(n - 1, i0, -1))))
        done = runner.sweeps(r_all, tasks, workers)
        for state in done.pop(AtomsTask.KEY, ()):
            cache.add(state)
        if atoms_beside:
            limit = separated_atoms(species, cache)
            guesses = fragment_guesses(species, multiplicity - 1, cache)
        got = done["restricted/from-equilibrium"]
        branches["restricted"] = _flag_outliers(record("restricted/from-equilibrium", got, "restricted", "RHF"))
        unstable = [i for i in range(n) if got[i].converged and got[i].extra.get("uhf_unstable")]
        if unstable:
            k = unstable[0]
            instability = (r_all[k - 1] if k > 0 else float("nan"), r_all[k])
            if auto:
                name = "unrestricted/from-instability"
                dm = None
                if store.get_point(species, multiplicity, level, name, r_all[k]) is None:
                    dm = instability_start(runner, r_all[k], got[k])
                tasks = [SweepTask(name, tuple(range(k, n)), "UHF", dm)]
                tasks += [SweepTask(f"unrestricted/{label}", tuple(range(n - 1, k - 1, -1)), "UHF", dmf)
                          for label, dmf, _ in guesses]
                done = runner.sweeps(r_all, tasks, workers)
                uhf_sweeps = [record(t.name, done.get(t.name, {}), "unrestricted", "UHF") for t in tasks]
                branches["unrestricted"] = _flag_outliers(_lowest(uhf_sweeps, n))
            else:
                notes.append(
                    f"the RHF solution is unstable towards UHF beyond {bohr_to_angstrom(instability[1]):.3f} A;"
                    " use HF or UHF for a curve that dissociates correctly"
                )
    else:
        branch = "unrestricted" if reference == "UHF" else "restricted"
        tasks = from_equilibrium_tasks(branch, reference)
        tasks += [SweepTask(f"{branch}/{label}", tuple(range(n - 1, -1, -1)), reference, dmf) for label, dmf, _ in guesses]
        runner.prefetch_integrals(r_all, list(dict.fromkeys(t.name for t in tasks)), workers)
        done = runner.sweeps(r_all, tasks, workers)
        names = list(dict.fromkeys(t.name for t in tasks))
        lists = [record(nm, done.get(nm, {}), branch, reference) for nm in names]
        branches[branch] = _flag_outliers(_lowest(lists, n))

    frag_limit = min((g[2] for g in guesses), default=None)

    # lowest trusted solution per distance over the branches
    final = []
    for i in range(n):
        cands = [b[i] for b in branches.values() if b[i] is not None]
        good = [p for p in cands if p.trusted]
        if good:
            best = min(good, key=lambda p: (p.energy_hartree, p.branch != "restricted"))
            # a restricted point within the split threshold of the unrestricted one is the same solution
            rest = [p for p in good if p.branch == "restricted"]
            if rest and best.branch != "restricted" and rest[0].energy_hartree - best.energy_hartree < BRANCH_SPLIT_HARTREE:
                best = rest[0]
            final.append(best)
        else:
            final.append(cands[0])
    final = _flag_outliers(final)

    # does the curve reach the separated atoms?
    trusted = [p for p in final if p.trusted]
    if trusted:
        last = trusted[-1]
        gap = last.energy_hartree - limit.energy_hartree
        if gap > 1e-3:
            notes.append(
                f"at {last.r_angstrom:.2f} A the curve lies {gap:.4f} Eh above the separated atoms"
                + (" (a restricted curve dissociates to the wrong limit)" if last.branch == "restricted" else "")
            )
    if frag_limit is not None and frag_limit > limit.energy_hartree + 1e-6:
        notes.append(
            f"a single determinant of multiplicity {multiplicity} separates into atoms in spin states"
            f" {frag_limit - limit.energy_hartree:.4f} Eh above the ground-state atoms"
        )
    if trusted:
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
    return ScanResult(
        tuple(final),
        {k: tuple(v) for k, v in branches.items()},
        {k: tuple(v) for k, v in sweeps.items()},
        reference,
        instability,
        limit,
        frag_limit,
        runner.computed,
        runner.reused,
        tuple(notes),
    )


#: refinement about the coarse minimum: points at k * REFINE_STEP_ANGSTROM, k = -REFINE_HALF..REFINE_HALF
REFINE_STEP_ANGSTROM = 0.01
REFINE_HALF = 4


def split_jobs(fn, jobs, parts: int) -> list:
    """``jobs`` as up to ``parts`` contiguous :class:`JobsTask` chunks (for :meth:`_Runner.sweeps`)."""
    jobs = tuple(jobs)
    if not jobs:
        return []
    size = -(-len(jobs) // max(1, parts))
    return [JobsTask(fn, jobs[k:k + size], k) for k in range(0, len(jobs), size)]


def job_results(done: dict, n: int) -> list:
    """The results of the :class:`JobsTask` chunks of a stage, in job order."""
    out = []
    for first in sorted(done.get(JobsTask.KEY, {})):
        out.extend(done[JobsTask.KEY][first])
    if len(out) != n:  # pragma: no cover - every chunk runs once
        raise RuntimeError(f"{len(out)} of {n} jobs came back")
    return out


def refine_minimum(species, multiplicity, level, scan: ScanResult, store, well_branch: str, r_guess_bohr: float, progress=None,
                   workers: int = 1, beside=None):
    """Extra points about a coarse minimum for the local fit.

    A chain warm-started from the nearest trusted point of the well branch, outward
    then inward, with the same reference and stability following as the curve;
    stored under the sweep ``<branch>/refine``. ``beside`` is (fn, jobs): independent jobs run
    in the same stage, spread over the same processes (the orbital analysis along the curve).

    Returns:
        (points, computed, reused, results): points a tuple of CurvePoint, increasing r (untrusted
        ones flagged), and ``[fn(job) for job in jobs]`` (None without ``beside``); () and None
        for the points and results when the well branch has no trusted point.
    """
    from ..units import angstrom_to_bohr

    pts = scan.branches.get(well_branch) or scan.points
    good = [p for p in pts if p is not None and p.trusted]
    if not good:
        return (), 0, 0, None
    step = float(angstrom_to_bohr(REFINE_STEP_ANGSTROM))
    r_new = [r_guess_bohr + k * step for k in range(-REFINE_HALF, REFINE_HALF + 1)]
    nearest = min(good, key=lambda p: abs(p.r_bohr - r_guess_bohr))
    ref = "UHF" if nearest.branch == "unrestricted" else ("ROHF" if scan.reference == "ROHF" else "RHF")
    runner = _Runner(species, multiplicity, level, store, progress)
    start = store.get_point(species, multiplicity, level, nearest.sweep, nearest.r_bohr)
    dm0 = None if start is None else start.dm
    name = f"{nearest.branch}/refine"
    mid = REFINE_HALF
    tasks = [SweepTask(name, tuple(range(mid, len(r_new))), ref, dm0),
             SweepTask(name, tuple(range(mid - 1, -1, -1)), ref, dm0, seed=mid)]
    if beside is not None:
        tasks += split_jobs(beside[0], beside[1], max(1, workers))
    done = runner.sweeps(r_new, tasks, workers)
    out = _flag_outliers(_as_curve_points(done[name], len(r_new), nearest.branch, name, ref))
    results = job_results(done, len(beside[1])) if beside is not None else None
    return tuple(out), runner.computed, runner.reused, results
