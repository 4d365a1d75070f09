"""One self-consistent-field solution: SCF objects, the rescue ladder and stability following.

Shared by every method that starts from a Hartree-Fock (or later Kohn-Sham) reference. Measured
facts it is built around (PySCF 2.14):

* ``converged`` is a flag to check, not an exception; a failed point comes back with
  ``converged=False`` and a reason, never raised;
* a warm-started point of a diatomic converges in a handful of cycles on 10-30 functions, where
  the integrals dominate (they come from the per-process cache, :mod:`lcao.methods.cache`).
"""

from __future__ import annotations

import logging
import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from .cache import caches

log = logging.getLogger(__name__)

CONV_TOL = 1e-9
#: an internal instability must lower the energy by this much to be followed
STABILITY_GAIN = 1e-8
MAX_STABILITY_STEPS = 5
#: DIIS cycles for re-converging from orbitals rotated along an instability before second-order
#: SCF takes over. Such a start lies near a saddle point: DIIS either gets away within about 40
#: cycles or oscillates, and then the level-shift rung rarely helps either (at long range in CO,
#: HF/6-31G, 80 DIIS and 150 level-shift cycles failed where second-order SCF converged in 0.14 s).
AFTER_INSTABILITY_DIIS_CYCLES = 40
#: cycles of the level-shift rung. Over nine HF/6-31G curves (CO, BF, N2, NO+, CN-, O2, NO, C2, CN;
#: about 1300 SCFs) eight points failed plain DIIS: the level shift rescued one, after 170 cycles,
#: and second-order SCF the other seven, each after 150 vain level-shift cycles.
LEVEL_SHIFT_CYCLES = 60


@dataclass(frozen=True)
class Solution:
    """Outcome of one SCF at one geometry (``scf`` is the PySCF object; it stays in the method).

    Attributes:
        energy: total energy, hartree (NaN when nothing converged).
        converged: whether the SCF met its convergence criteria.
        cycles: SCF iterations over every attempt.
        dm: density matrix (alpha and beta stacked for open-shell references).
        rescue: which rung of the ladder converged ('none', 'level-shift', 'second-order', 'failed').
        stability: 'stable', 'followed N', 'still unstable' or 'not checked'.
        reason: why the point is untrustworthy, or None.
    """

    energy: float
    converged: bool
    cycles: int
    dm: np.ndarray = field(repr=False, compare=False)
    rescue: str = "none"
    stability: str = "not checked"
    reason: str | None = None
    scf: object = field(default=None, repr=False, compare=False)


def _classes(kohn_sham: bool, symmetric: bool = False):
    """PySCF's SCF classes; with ``symmetric`` its symmetry-adapted ones (orbitals kept in the irreps of the
    molecule's point group, :func:`lcao.methods.molecule.point_group`)."""
    if symmetric:
        if kohn_sham:
            from pyscf.dft import rks_symm, uks_symm

            return {"RHF": rks_symm.SymAdaptedRKS, "UHF": uks_symm.SymAdaptedUKS, "ROHF": rks_symm.SymAdaptedROKS}
        from pyscf.scf import hf_symm, uhf_symm

        return {"RHF": hf_symm.SymAdaptedRHF, "UHF": uhf_symm.SymAdaptedUHF, "ROHF": hf_symm.SymAdaptedROHF}
    if kohn_sham:
        from pyscf.dft import rks, roks, uks

        return {"RHF": rks.RKS, "UHF": uks.UKS, "ROHF": roks.ROKS}
    from pyscf.scf import hf, rohf, uhf

    return {"RHF": hf.RHF, "UHF": uhf.UHF, "ROHF": rohf.ROHF}


#: PySCF's integration grid level for density functionals (its default; recorded in every output)
GRID_LEVEL = 3


def make_scf(mol, reference: str, two_electron: bool = True, xc: str | None = None):
    """A PySCF SCF object for ``reference`` ('RHF', 'UHF', 'ROHF'; with a functional ``xc`` the
    Kohn-Sham ones, RKS, UKS, ROKS), no checkpoint file, quiet; PySCF's symmetry-adapted classes for a
    molecule built with a point group.

    The one-electron integrals, the orthogonaliser of the overlap, and the two-electron integrals where
    they fit in memory come from the process's integral cache (PySCF's custom-Hamiltonian hooks
    ``get_hcore``, ``get_ovlp`` and ``_eri``, and its public ``check_linear_dependency``); with
    ``two_electron`` False PySCF computes them only if the object needs them. Small bases take J and K
    as matrix products (:mod:`lcao.methods.jk`).
    """
    from .jk import product_class

    ints = caches().integrals
    mf = product_class(_classes(xc is not None, bool(mol.symmetry))[reference])(mol)
    if xc is not None:
        mf.xc = xc
        mf.grids = grids_for(mol, GRID_LEVEL)
    mf.chkfile = None
    mf.verbose = 0
    mf.conv_tol = CONV_TOL
    mf.conv_check = False  # PySCF's extra cycle after convergence: the gradient criterion already holds
    mf.max_cycle = 80
    if two_electron and ints.keeps(mol):  # larger sets: PySCF computes them itself when it needs them
        mf._eri = ints.two_electron(mol)
    h, s, x = ints.one_electron(mol)
    mf.get_hcore = lambda *a, **k: h
    mf.get_ovlp = lambda *a, **k: s
    if not mol.symmetry:  # a symmetry-adapted class builds its own, per irrep
        mf.check_linear_dependency = lambda *a, **k: x
    return mf


def grids_for(mol, level: int):
    """PySCF's integration grid for ``mol`` at ``level``, built once per geometry (46 ms for N2)."""
    from pyscf.dft import gen_grid

    kept = caches().grids
    key = (caches().integrals.key(mol), level)
    g = kept.get(key)
    if g is None:
        g = gen_grid.Grids(mol)
        g.level = level
        g.build(with_non0tab=True)
        kept.put(key, g)
    return g


def rotations(mf) -> int:
    """Number of occupied-virtual rotations (0 means no stability analysis is possible)."""
    occ = np.asarray(mf.mo_occ)
    if occ.ndim == 1:
        return int((occ > 0).sum() * (occ < 2).sum() - ((occ > 0) & (occ < 2)).sum())
    return int(sum((o > 0).sum() * (o == 0).sum() for o in occ))


def _kernel(mf, dm0):
    mf.kernel(dm0=dm0)
    cycles = mf.__dict__.get("cycles")
    if cycles is None:
        cycles = mf.max_cycle if not mf.converged else 0
    return bool(mf.converged) and math.isfinite(mf.e_tot), int(cycles)


def ladder(mol, reference: str, dm0, *, diis_cycles: int = 80, level_shift: bool = True, xc: str | None = None):
    """Plain DIIS, then level shift with damping (unless ``level_shift`` is False), then second-order
    SCF. Returns (SCF object, cycles, rung)."""
    mf = make_scf(mol, reference, xc=xc)
    mf.max_cycle = diis_cycles
    ok, cycles = _kernel(mf, dm0)
    if ok:
        return mf, cycles, "none"
    start = dm0
    if level_shift:
        log.debug("SCF did not converge in %d cycles; trying a level shift", cycles)
        ms = make_scf(mol, reference, xc=xc)
        ms.level_shift = 0.3
        ms.damp = 0.3
        ms.diis_start_cycle = 6
        ms.max_cycle = LEVEL_SHIFT_CYCLES
        ok, c = _kernel(ms, start)
        cycles += c
        if ok:
            mf = make_scf(mol, reference, xc=xc)
            ok, c = _kernel(mf, ms.make_rdm1())
            cycles += c
            if ok:
                return mf, cycles, "level-shift"
    log.debug("trying second-order SCF after %d cycles", cycles)
    mn = make_scf(mol, reference, xc=xc).newton()
    mn.max_cycle = 60
    ok, c = _kernel(mn, start)
    cycles += c
    return mn, cycles, "second-order" if ok else "failed"


def _stability_step(mf, reference: str):
    """One internal stability check; returns new orbitals or None when stable.

    Hartree-Fock RHF and UHF solutions with the integrals in memory and a small basis use the dense
    Hessian of :mod:`lcao.methods.stability`, the rest (Kohn-Sham solutions among them) its Davidson
    route on PySCF's Hessian-vector products. A symmetry-adapted solution is checked only along rotations
    that keep its symmetry (the Davidson route with PySCF's symmetry mask).
    """
    if rotations(mf) == 0:
        return None
    from pyscf.lib.exceptions import LinearDependencyError

    from . import stability as st

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if mf.mol.symmetry:
                e, v = st.davidson_internal(mf, reference, keep_symmetry=True)
            elif reference in ("RHF", "UHF") and st.dense_possible(mf):
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
        return st.rotate_orbitals(mf.mo_coeff, mf.mo_occ, v)
    na = int(np.count_nonzero(mf.mo_occ[0] > 0) * np.count_nonzero(mf.mo_occ[0] == 0))
    return (st.rotate_orbitals(mf.mo_coeff[0], mf.mo_occ[0], v[:na]),
            st.rotate_orbitals(mf.mo_coeff[1], mf.mo_occ[1], v[na:]))


def solve(mol, reference: str, dm0=None, *, follow_stability: bool = True, xc: str | None = None) -> Solution:
    """Converge one SCF from ``dm0`` and follow internal instabilities until stable.

    Args:
        mol: the PySCF molecule; reference: 'RHF', 'UHF' or 'ROHF'; xc: a functional for Kohn-Sham
            (None: Hartree-Fock).
        dm0: starting density (None for PySCF's default guess).
        follow_stability: run internal stability analysis and re-converge from the lower-energy
            direction until the solution is stable.

    Returns:
        Solution (``converged=False`` with a reason on failure; never raises for a convergence failure).
    """
    try:
        mf, cycles, rescue = ladder(mol, reference, dm0, xc=xc)
    except (np.linalg.LinAlgError, FloatingPointError, ValueError) as exc:
        n = mol.nao
        empty = np.zeros((2, n, n)) if reference != "RHF" else np.zeros((n, n))
        return Solution(float("nan"), False, 0, empty, "failed", "not checked", f"SCF raised {exc!r}")
    if rescue == "failed":
        return Solution(float(mf.e_tot) if math.isfinite(mf.e_tot) else float("nan"), False, cycles,
                        np.asarray(mf.make_rdm1()), rescue, "not checked",
                        "not converged after level shift and second-order SCF", mf)
    steps = 0
    stab = "stable"
    if follow_stability:
        for _ in range(MAX_STABILITY_STEPS):
            mo = _stability_step(mf, reference)
            if mo is None:
                break
            dm = mf.make_rdm1(mo, mf.mo_occ)
            trial, c, r = ladder(mol, reference, dm, diis_cycles=AFTER_INSTABILITY_DIIS_CYCLES, level_shift=False, xc=xc)
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
    return Solution(float(mf.e_tot), True, cycles, np.asarray(mf.make_rdm1()), rescue, stab, None, mf)


def spin_square(mf) -> float | None:
    """<S^2> of an unrestricted solution."""
    try:
        return float(mf.spin_square()[0])
    except Exception:  # pragma: no cover - diagnostics only
        return None


def unstable_towards_uhf(mf):
    """RHF -> UHF (RKS -> UKS) triplet instability check of a converged closed-shell solution.

    Returns:
        (unstable, dm): ``dm`` is an (alpha, beta) starting density along the instability, or None
        when the RHF solution is stable.
    """
    if rotations(mf) == 0:
        return False, None
    from . import stability as st

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        e, v = st.rhf_to_uhf(mf) if st.dense_possible(mf) else st.davidson_rhf_to_uhf(mf)
    if e is None or not e < st.UNSTABLE_BELOW:
        return False, None
    mo_a, mo_b = st.rotate_orbitals(mf.mo_coeff, mf.mo_occ, v), mf.mo_coeff
    occ = np.asarray(mf.mo_occ) / 2.0
    dma = (mo_a * occ) @ mo_a.T
    dmb = (mo_b * occ) @ mo_b.T
    return True, np.array([dma, dmb])


def orbitals_of(mf):
    """(mo_energy, mo_coeff, mo_occ) of a converged SCF, as arrays."""
    return (np.asarray(mf.mo_energy), np.asarray(mf.mo_coeff), np.asarray(mf.mo_occ))
