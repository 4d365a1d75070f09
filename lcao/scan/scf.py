"""One SCF calculation: molecule set-up, the rescue ladder and stability following.

Measured facts this module is built around (PySCF 2.14):

* SCF under linear-molecule symmetry cannot break spin symmetry and Pi radicals
  do not converge in the full linear groups, so every calculation here runs
  without point-group symmetry; orbitals are labelled afterwards.
* The checkpoint file costs about half of a cheap point: it is off.
* ``converged`` is a flag to check, not an exception; a failed point is
  returned with ``converged=False`` and a reason, never raised.
"""

from __future__ import annotations

import contextlib
import copy
import logging
import math
import warnings
from collections import OrderedDict
from dataclasses import dataclass, field

import numpy as np

from . import lean

log = logging.getLogger(__name__)

#: SCF objects of PySCF's classes with the per-call overhead taken out (:mod:`lcao.scan.lean`: J/K as
#: matrix products for small bases, direct LAPACK, numpy DIIS products); False runs PySCF's classes
#: as they are (tests compare the two)
LEAN_SCF = True

CONV_TOL = 1e-9
#: An internal instability must lower the energy by this much to be followed.
STABILITY_GAIN = 1e-8
MAX_STABILITY_STEPS = 5


@dataclass(frozen=True)
class Solution:
    """Outcome of one SCF at one geometry.

    Attributes:
        energy: total energy, hartree (NaN when nothing converged).
        converged: whether the SCF met its convergence criteria.
        cycles: SCF iterations over every attempt.
        s2: <S^2> for unrestricted references, else None.
        dm: density matrix (alpha and beta stacked for open-shell references).
        rescue: which rung of the ladder converged ('none', 'level-shift', 'second-order').
        stability: 'stable', 'followed N' (N instabilities followed) or 'not checked'.
        reason: why the point is untrustworthy, or None.
    """

    energy: float
    converged: bool
    cycles: int
    s2: float | None
    dm: np.ndarray = field(repr=False, compare=False)
    rescue: str = "none"
    stability: str = "not checked"
    reason: str | None = None
    scf: object = field(default=None, repr=False, compare=False)


def _build(atoms, level, charge: int, spin: int):
    from pyscf import gto

    mol = gto.Mole()
    mol.atom = atoms
    mol.unit = "Bohr"
    mol.basis = level.basis
    mol.cart = level.cartesian
    mol.charge = charge
    mol.spin = spin
    mol.symmetry = False
    mol.verbose = 0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mol.build(dump_input=False, parse_arg=False)
    return mol


class BoundedCache:
    """A least-recently-used mapping bounded by the total ``size`` of its values (entries by default)."""

    def __init__(self, limit, size=lambda value: 1):
        self.limit = limit
        self.size = size
        self.total = 0
        self._items: OrderedDict = OrderedDict()

    def get(self, key):
        value = self._items.get(key)
        if value is not None:
            self._items.move_to_end(key)
        return value

    def put(self, key, value) -> None:
        if value is None:  # nothing to keep (a point without orbitals)
            return
        old = self._items.pop(key, None)
        if old is not None:
            self.total -= self.size(old)
        self._items[key] = value
        self.total += self.size(value)
        while self.total > self.limit and self._items:
            _, dropped = self._items.popitem(last=False)
            self.total -= self.size(dropped)

    def clear(self) -> None:
        self._items.clear()
        self.total = 0

    def keys(self) -> list:
        """The keys held now, least recently used first."""
        return list(self._items)

    def __len__(self) -> int:
        return len(self._items)


def _nbytes(value) -> int:
    return sum(np.asarray(a).nbytes for a in value) if isinstance(value, tuple) else np.asarray(value).nbytes


#: molecules already built (basis parsed), per atoms, level, charge and spin: a new distance
#: only moves the second nucleus (0.02 ms against 0.7 ms for a fresh build)
_TEMPLATES = BoundedCache(64)


def build_molecule(symbols, r_bohr: float, level, charge: int, spin: int):
    """A PySCF molecule on the z axis, no symmetry, no output.

    Args:
        symbols: the two element symbols.
        r_bohr: distance, bohr.
        level: :class:`lcao.levels.Level`.
        charge: net charge; spin: 2S (number of alpha minus beta electrons).
    """
    key = (tuple(symbols), level.basis, level.cartesian, charge, spin)
    tmpl = _TEMPLATES.get(key)
    if tmpl is None:
        tmpl = _build([(symbols[0], (0.0, 0.0, 0.0)), (symbols[1], (0.0, 0.0, float(r_bohr)))], level, charge, spin)
        # fixed once: PySCF otherwise counts the electrons from the nuclear charges in every SCF cycle
        tmpl.nelectron = tmpl.nelectron
        _TEMPLATES.put(key, tmpl)
    coords = np.array([[0.0, 0.0, 0.0], [0.0, 0.0, float(r_bohr)]])
    return tmpl.set_geom_(coords, unit="Bohr", inplace=False)


def build_atom(symbol: str, level, charge: int, spin: int):
    """A single atom at the origin, no symmetry."""
    return _build([(symbol, (0.0, 0.0, 0.0))], level, charge, spin)


class IntegralCache:
    """One- and two-electron integrals (the latter 8-fold packed) of recent geometries.

    A curve visits most distances several times (restricted and unrestricted branches, the sweeps
    from both ends, analysis), and the integrals are about 40 % of a warm-started 6-31G SCF. Keys
    are the geometry and the basis, not the charge or spin. Two-electron sets are bounded in bytes;
    a curve profits only if about 40 geometries fit, so a set above 1/32 of the bound is not kept.
    """

    def __init__(self, limit_bytes: int):
        self.limit_bytes = limit_bytes
        self._eri = BoundedCache(limit_bytes, _nbytes)
        self._one = BoundedCache(256)

    @staticmethod
    def key(mol):
        return (tuple(mol.elements), mol.atom_coords().round(10).tobytes(), bool(mol.cart), repr(mol.basis))

    def get(self, mol) -> np.ndarray:
        k = self.key(mol)
        eri = self._eri.get(k)
        if eri is None:
            eri = mol.intor("int2e", aosym="s8")
            if eri.nbytes <= self.limit_bytes / 32:
                self._eri.put(k, eri)
        return eri

    @staticmethod
    def set_bytes(mol) -> int:
        """Size of ``mol``'s 8-fold packed two-electron set."""
        pairs = mol.nao * (mol.nao + 1) // 2
        return 8 * pairs * (pairs + 1) // 2

    def keeps(self, mol) -> bool:
        """Whether a two-electron set of ``mol``'s size would be kept."""
        return self.set_bytes(mol) <= self.limit_bytes / 32

    def add(self, key, eri, one=None) -> None:
        """Keep integrals computed elsewhere (another process) under ``key`` (see :meth:`key`)."""
        if self._eri.get(key) is None and eri.nbytes <= self.limit_bytes / 32:
            self._eri.put(key, eri)
        if one is not None and self._one.get(key) is None:
            for a in one:
                a.flags.writeable = False
            self._one.put(key, tuple(one))

    def add_sets(self, sets) -> None:
        """Keep every ``(key, two-electron set, one-electron set)`` of ``sets`` (as :meth:`export`
        gives them, from another process)."""
        for key, eri, one in sets:
            self.add(key, eri, one)

    def kept_keys(self) -> set:
        """Keys of the geometries whose two-electron integrals are kept now."""
        return set(self._eri.keys())

    def export(self, keys, limit_bytes: int) -> list:
        """``[(key, two-electron set, one-electron set)]`` of the kept geometries among ``keys``, up
        to ``limit_bytes`` of two-electron integrals in all (for :meth:`add` in another process)."""
        out, total = [], 0
        for k in keys:
            eri, one = self._eri.get(k), self._one.get(k)
            if eri is None or total + eri.nbytes > limit_bytes:
                continue
            total += eri.nbytes
            out.append((k, eri, one))
        return out

    def one_electron(self, mol):
        """(core Hamiltonian, overlap) of the geometry, read-only arrays."""
        return self._one_set(mol)[:2]

    def orthogonaliser(self, mol):
        """PySCF's canonical orthogonalisation of the overlap (``check_linear_dependency``), read-only."""
        return self._one_set(mol)[2]

    def one_electron_set(self, mol):
        """(core Hamiltonian, overlap, orthogonaliser) of the geometry in one lookup."""
        return self._one_set(mol)

    def _one_set(self, mol):
        from pyscf.scf import hf

        k = self.key(mol)
        got = self._one.get(k)
        if got is None:
            h = mol.intor_symmetric("int1e_kin") + mol.intor_symmetric("int1e_nuc")
            s = mol.intor_symmetric("int1e_ovlp")
            x = hf.check_linear_dependency(s)
            for a in (h, s, x):
                a.flags.writeable = False
            got = (h, s, x)
            self._one.put(k, got)
        return got

    def prefetch(self, mols, workers: int) -> int:
        """Compute the integrals of ``mols`` not yet kept, split over this process and forked ones
        (:func:`lcao.scan.workers.split_map`), and keep them; returns how many geometries.

        Sweeps in different processes visit the same distances: computed first and inherited by
        the forked sweeps, each set is computed once, and on both cores. Nothing is done for one
        worker, for sets this cache would not keep, or when they would fill half of it.
        """
        from .workers import fork_possible, split_map

        todo, seen = [], set()
        for mol in mols:
            k = self.key(mol)
            if k not in seen and self._eri.get(k) is None:
                seen.add(k)
                todo.append(mol)
        if len(todo) < 2 or not fork_possible(workers):
            return 0
        if not self.keeps(todo[0]) or self.set_bytes(todo[0]) * len(todo) > self.limit_bytes / 2:
            return 0
        got = split_map(lambda mol: (mol.intor("int2e", aosym="s8"), self._one_set(mol)), todo, workers)
        for mol, (eri, one) in zip(todo, got):
            self.add(self.key(mol), eri, one)
        return len(todo)

    def clear(self) -> None:
        self._eri.clear()
        self._one.clear()


#: 0.1 MB per geometry of N2 in 6-31G, 0.7 MB in cc-pVDZ, 4.7 MB in aug-cc-pVDZ (kept), 13 MB in
#: cc-pVTZ (not kept)
INTEGRALS = IntegralCache(160 * 2**20)

#: orbitals (mo_energy, mo_coeff, mo_occ) of the points computed in this process (and sent back by
#: forked sweeps), keyed like the store's points, so the analysis along a curve needs no Fock build;
#: 5 KB per point of N2 in 6-31G, 58 KB in cc-pVTZ
ORBITALS = BoundedCache(48 * 2**20, _nbytes)


def orbitals_of(mf):
    """(mo_energy, mo_coeff, mo_occ) of a converged SCF, as arrays."""
    return (np.asarray(mf.mo_energy), np.asarray(mf.mo_coeff), np.asarray(mf.mo_occ))


def overlap(mol) -> np.ndarray:
    """The AO overlap matrix of ``mol`` (cached, read-only)."""
    return INTEGRALS.one_electron(mol)[1]


_LABELS: dict = {}


def ao_labels(mol, fmt=True):
    """``mol.ao_labels(fmt)``, cached per atoms and basis (labels do not depend on the distance)."""
    k = (tuple(mol.elements), repr(mol.basis), bool(mol.cart), fmt)
    got = _LABELS.get(k)
    if got is None:
        got = _LABELS[k] = mol.ao_labels(fmt=fmt)
    return got


_BASIS_FILES: dict = {}


@contextlib.contextmanager
def kept_basis_files():
    """Within the block, basis sets PySCF reads by name are parsed once per element.

    PySCF's default initial guess reads and parses the ANO basis file of every element on every
    call: about 6 ms each, 7 % of a 6-species HF/6-31G series (254 reads). The block swaps
    ``pyscf.gto.basis.load`` for a version that keeps the parsed sets (handing out copies) and
    restores it on exit; other arguments than a name and a symbol go to PySCF unchanged.
    """
    from pyscf.gto import basis as gb

    original = gb.load
    if getattr(original, "_lcao_kept", False):  # nested block
        yield
        return

    def load(name, symb, *args, **kwargs):
        if args or kwargs or not isinstance(name, str) or not isinstance(symb, str):
            return original(name, symb, *args, **kwargs)
        key = (name, symb)
        if key not in _BASIS_FILES:
            _BASIS_FILES[key] = original(name, symb)
        return copy.deepcopy(_BASIS_FILES[key])

    load._lcao_kept = True
    gb.load = load
    try:
        yield
    finally:
        gb.load = original


def make_scf(mol, reference: str, two_electron: bool = True):
    """An SCF object for ``reference`` ('RHF', 'UHF', 'ROHF') with the checkpoint file off.

    The one-electron integrals, and the two-electron ones where PySCF would hold them in memory,
    come from :data:`INTEGRALS` (the latter only with ``two_electron``; otherwise PySCF computes
    them if the object ever needs them).
    """
    from pyscf import scf

    from pyscf.scf import hf

    cls = {"RHF": scf.RHF, "UHF": scf.UHF, "ROHF": scf.ROHF}[reference]
    muted, hf.MUTE_CHKFILE = hf.MUTE_CHKFILE, True  # no temporary checkpoint file is created and removed
    try:
        mf = cls(mol)
    finally:
        hf.MUTE_CHKFILE = muted
    mf.chkfile = None
    mf.verbose = 0
    mf.conv_tol = CONV_TOL
    mf.conv_check = False  # PySCF's extra cycle after convergence: the gradient criterion already holds
    mf.max_cycle = 80
    # a set the cache keeps (5 MB at most) fits; PySCF's own check reads /proc/self/statm every time
    if two_electron and (mol.incore_anyway or INTEGRALS.keeps(mol) or mf._is_mem_enough()):
        mf._eri = INTEGRALS.get(mol)
    if LEAN_SCF:
        lean.attach(mf)
    h, s, x = INTEGRALS.one_electron_set(mol)
    mf.get_hcore = lambda *a, **k: h
    mf.get_ovlp = lambda *a, **k: s
    mf.check_linear_dependency = lambda *a, **k: x
    return mf


def _rotations(mf) -> int:
    """Number of occupied-virtual rotations (0 means no stability analysis is possible)."""
    occ = np.asarray(mf.mo_occ)
    if occ.ndim == 1:
        return int((occ > 0).sum() * (occ < 2).sum() - ((occ > 0) & (occ < 2)).sum())
    return int(sum((o > 0).sum() * (o == 0).sum() for o in occ))


def _kernel(mf, dm0):
    mf.kernel(dm0=dm0)
    cycles = getattr(mf, "cycles", None)
    if cycles is None:
        cycles = mf.max_cycle if not mf.converged else 0
    return bool(mf.converged) and math.isfinite(mf.e_tot), int(cycles)


#: DIIS cycles for re-converging from orbitals rotated along an instability before second-order
#: SCF takes over. Such a start lies near a saddle point: DIIS either gets away within about 40
#: cycles or oscillates, and then the level-shift rung rarely helps either (at long range in CO,
#: HF/6-31G, 80 DIIS and 150 level-shift cycles failed where second-order SCF converged in 0.14 s).
AFTER_INSTABILITY_DIIS_CYCLES = 40
#: cycles of the level-shift rung. Over nine HF/6-31G curves (CO, BF, N2, NO+, CN-, O2, NO, C2, CN;
#: about 1300 SCFs) eight points failed plain DIIS: the level shift rescued one, after 170 cycles,
#: and second-order SCF the other seven, each after 150 vain level-shift cycles.
LEVEL_SHIFT_CYCLES = 60


def _ladder(mol, reference: str, dm0, *, diis_cycles: int = 80, level_shift: bool = True):
    """Plain DIIS, then level shift with damping (unless ``level_shift`` is False), then
    second-order SCF."""
    mf = make_scf(mol, reference)
    mf.max_cycle = diis_cycles
    ok, cycles = _kernel(mf, dm0)
    if ok:
        return mf, cycles, "none"
    start = dm0
    if level_shift:
        log.debug("SCF did not converge in %d cycles; trying a level shift", cycles)
        ms = make_scf(mol, reference)
        ms.level_shift = 0.3
        ms.damp = 0.3
        ms.diis_start_cycle = 6
        ms.max_cycle = LEVEL_SHIFT_CYCLES
        ok, c = _kernel(ms, start)
        cycles += c
        if ok:
            mf = make_scf(mol, reference)
            ok, c = _kernel(mf, ms.make_rdm1())
            cycles += c
            if ok:
                return mf, cycles, "level-shift"
    log.debug("trying second-order SCF after %d cycles", cycles)
    mn = make_scf(mol, reference).newton()
    mn.max_cycle = 60
    ok, c = _kernel(mn, start)
    cycles += c
    return mn, cycles, "second-order" if ok else "failed"


def _stability_step(mf, reference: str):
    """One internal stability check; returns new orbitals or None when stable.

    RHF and UHF solutions with the integrals in memory and a small basis use the dense Hessian
    of :mod:`lcao.scan.stability`, the rest its Davidson route on PySCF's Hessian-vector products.
    """
    if _rotations(mf) == 0:
        return None
    from pyscf.lib.exceptions import LinearDependencyError
    from pyscf.scf import stability

    from . import stability as st

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if reference in ("RHF", "UHF") and st.dense_possible(mf):
                e, v = st.internal(mf, reference)
            else:
                e, v = st.davidson_internal(mf, reference)
    except (LinearDependencyError, ZeroDivisionError) as exc:
        # Davidson finds no trial vector (e.g. a single open shell with nothing to rotate)
        log.debug("stability analysis skipped: %s", exc)
        return None
    if e is None or not e < st.UNSTABLE_BELOW:
        return None
    if np.asarray(mf.mo_coeff).ndim == 2:
        return stability._rotate_mo(mf.mo_coeff, mf.mo_occ, v)
    na = int(np.count_nonzero(mf.mo_occ[0] > 0) * np.count_nonzero(mf.mo_occ[0] == 0))
    return (stability._rotate_mo(mf.mo_coeff[0], mf.mo_occ[0], v[:na]),
            stability._rotate_mo(mf.mo_coeff[1], mf.mo_occ[1], v[na:]))


def solve(mol, reference: str, dm0=None, *, follow_stability: bool = True) -> Solution:
    """Converge one SCF from ``dm0`` and follow internal instabilities until stable.

    Args:
        mol: the PySCF molecule.
        reference: 'RHF', 'UHF' or 'ROHF'.
        dm0: starting density (None for PySCF's default guess).
        follow_stability: run internal stability analysis and re-converge from
            the lower-energy direction until the solution is stable.

    Returns:
        Solution (``converged=False`` with a reason on failure; never raises for
        a convergence failure).
    """
    try:
        mf, cycles, rescue = _ladder(mol, reference, dm0)
    except (np.linalg.LinAlgError, FloatingPointError, ValueError) as exc:
        n = mol.nao
        empty = np.zeros((2, n, n)) if reference != "RHF" else np.zeros((n, n))
        return Solution(float("nan"), False, 0, None, empty, "failed", "not checked", f"SCF raised {exc!r}")
    if rescue == "failed":
        return Solution(
            float(mf.e_tot) if math.isfinite(mf.e_tot) else float("nan"),
            False,
            cycles,
            _s2(mf, reference),
            np.asarray(mf.make_rdm1()),
            rescue,
            "not checked",
            "not converged after level shift and second-order SCF",
            mf,
        )
    steps = 0
    stab = "stable"
    if follow_stability:
        for _ in range(MAX_STABILITY_STEPS):
            mo = _stability_step(mf, reference)
            if mo is None:
                break
            dm = mf.make_rdm1(mo, mf.mo_occ)
            trial, c, r = _ladder(mol, reference, dm, diis_cycles=AFTER_INSTABILITY_DIIS_CYCLES, level_shift=False)
            cycles += c
            if r == "failed" or trial.e_tot > mf.e_tot - STABILITY_GAIN:
                break
            mf, rescue, steps = trial, (rescue if r == "none" else r), steps + 1
        else:
            stab = "still unstable"
        if stab == "stable" and steps:
            stab = f"followed {steps}"
    else:
        stab = "not checked"
    return Solution(
        float(mf.e_tot), True, cycles, _s2(mf, reference), np.asarray(mf.make_rdm1()), rescue, stab, None, mf
    )


def _s2(mf, reference: str):
    if reference != "UHF":
        return None
    try:
        return float(mf.spin_square()[0])
    except Exception:  # pragma: no cover - diagnostics only
        return None


def unstable_towards_uhf(mf):
    """RHF -> UHF (triplet) instability check of a converged RHF solution.

    Returns:
        (unstable, dm): ``dm`` is an (alpha, beta) starting density along the
        instability, or None when the RHF solution is stable.
    """
    if _rotations(mf) == 0:
        return False, None
    from pyscf.scf import stability

    from . import stability as dense

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        e, v = dense.rhf_to_uhf(mf) if dense.dense_possible(mf) else dense.davidson_rhf_to_uhf(mf)
    if e is None or not e < dense.UNSTABLE_BELOW:
        return False, None
    mo_a, mo_b = stability._rotate_mo(mf.mo_coeff, mf.mo_occ, v), mf.mo_coeff
    occ = np.asarray(mf.mo_occ) / 2.0
    dma = (mo_a * occ) @ mo_a.T
    dmb = (mo_b * occ) @ mo_b.T
    return True, np.array([dma, dmb])


#: method family (see :data:`lcao.levels.METHODS`) -> solver(mol, reference, dm0) -> Solution.
#: A correlated method adds a family here whose solver runs the SCF with
#: :func:`solve` and adds its correlation energy to ``energy``.
SOLVERS = {"scf": solve}


def solver_for(level):
    """The solver of a level's method family."""
    try:
        return SOLVERS[level.family]
    except KeyError:  # pragma: no cover - guarded by METHODS
        raise NotImplementedError(f"no solver for method family {level.family!r}") from None
