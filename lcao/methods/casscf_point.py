"""One CASSCF point (from the previous point's orbitals or an SCF start, with the continuity checks), its
NEVPT2 energy, and the analysis of its natural orbitals (see :mod:`lcao.methods.multireference`)."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from .active_space import (CONV_TOL, OCCUPATION_JUMP, OVERLAP_MIN, PI_SPLIT, RETRY_MACRO_CYCLES, ActiveSpace,
                           initial_orbitals, state_term)
from .base import PointResult

# --- the calculations -----------------------------------------------------------------------------------

def _cas_object(mf, space: ActiveSpace, spin: int, weights, casci: bool = False):
    from pyscf import mcscf

    mc = (mcscf.CASCI if casci else mcscf.CASSCF)(mf, space.n_orbitals, space.nelecas)
    mc.verbose = 0
    mc.ncore = space.n_core
    s = spin / 2.0
    mc.fix_spin_(ss=s * (s + 1))
    if casci:
        mc.fcisolver.nroots = len(weights) if weights else 1
    else:
        mc.conv_tol = CONV_TOL
        mc.natorb = True
        if weights:
            mc.state_average_(list(weights))
    return mc


def _shell_scf(mol, spin: int):
    """An SCF object of the geometry with the process's integrals (not run)."""
    from .scf import make_scf

    return make_scf(mol, "RHF" if spin == 0 else "ROHF")


def _active_occupations(mc, space: ActiveSpace, ci) -> np.ndarray:
    dm = mc.fcisolver.make_rdm1(ci, space.n_orbitals, space.nelecas)
    return np.diag(np.asarray(dm))


def _is_pi_state(mol, mo_active, occupations) -> bool:
    """Two pi natural orbitals of one kind with occupations more than PI_SPLIT apart: one component of a
    degenerate Pi state."""
    from ..analysis.symmetry import kind_label, symmetry_basis, symmetry_weights_all
    from .molecule import overlap

    basis = symmetry_basis(mol)
    kinds: dict = {}
    for w, n in zip(symmetry_weights_all(mo_active, overlap(mol), basis), occupations):
        kind, lam, _par, _ = kind_label(w, basis.homonuclear)
        if lam == 1:
            kinds.setdefault(kind, []).append(float(n))
    for occ in kinds.values():
        occ = sorted(occ, reverse=True)
        if any(abs(occ[k] - occ[k + 1]) > PI_SPLIT for k in range(0, len(occ) - 1, 2)):
            return True
    return False


def _kernel(mc, mo0) -> None:
    """CASSCF from ``mo0``; where the macro iterations run out before convergence (stretched multiple bonds
    and near-degenerate roots converge slowly), go on once from where it stopped, with more iterations and
    smaller orbital steps."""
    mc.kernel(mo0)
    if not mc.converged:
        mc.max_cycle_macro = RETRY_MACRO_CYCLES
        mc.max_stepsize = 0.01
        mc.kernel(mc.mo_coeff, ci0=mc.ci)


def solve_point(mol, space: ActiveSpace, spin: int, start, r_bohr: float, atom: bool = False) -> PointResult:
    """CASSCF at one geometry from ``start`` (the previous point's orbitals and distance) or from an SCF
    solution; the continuity checks against the start (see the module docstring). Where the start leads to
    no convergence or to a discontinuous solution (a higher root), the point is solved again from an SCF
    start and that solution is kept if it is continuous with the previous point and no higher. Never raises
    for a convergence failure."""
    res, prev_active = _attempt(mol, space, spin, start, r_bohr, atom)
    if res.converged or prev_active is None or atom:
        return res
    fresh, _ = _attempt(mol, space, spin, None, r_bohr, atom, check=(prev_active, start))
    if fresh.converged and (not math.isfinite(res.energy) or fresh.energy <= res.energy + 1e-8):
        return replace(fresh, reason=None)
    return res


def _attempt(mol, space: ActiveSpace, spin: int, start, r_bohr: float, atom: bool, check=None):
    """One CASSCF solution from ``start`` (or from an SCF start), checked for continuity against the
    projected previous orbitals (those of ``start``, or ``check`` = (active orbitals, start) given);
    returns (PointResult, the projected previous active orbitals or None)."""
    from pyscf import mcscf

    from .molecule import overlap
    from .scf import solve

    mf = _shell_scf(mol, spin)
    weights = None
    prev_active = None
    usable = bool(start) and start.get("mo") is not None and np.shape(start["mo"])[0] == mol.nao
    if check is not None:
        prev_active, start = check
    try:
        if usable:
            weights = tuple(np.asarray(start["weights"]).tolist()) if start.get("weights") is not None and np.size(start["weights"]) > 1 else None
            prev = mol.set_geom_(np.array([[0.0, 0.0, 0.0], [0.0, 0.0, float(np.ravel(start["r"])[0])]]),
                                 unit="Bohr", inplace=False) if not atom else mol
            mc = _cas_object(mf, space, spin, weights)
            mf.mo_coeff = mf.check_linear_dependency()  # an orthonormal basis of the geometry to project into
            mo0 = mcscf.project_init_guess(mc, np.asarray(start["mo"]), prev, use_hf_core=False)
            prev_active = mo0[:, space.n_core:space.n_core + space.n_orbitals]
        else:
            sol = solve(mol, "RHF" if spin == 0 else "ROHF", None, follow_stability=False)
            if not sol.converged:
                return PointResult(r_bohr, float("nan"), False, sol.cycles, reason="the SCF start did not converge"), prev_active
            mf = sol.scf
            mo0 = initial_orbitals(mol, mf.mo_coeff, mf.mo_occ, mf.mo_energy, space)
            mc = _cas_object(mf, space, spin, None)
        _kernel(mc, mo0)
        if not usable and not atom and space.n_orbitals > 1:
            act = mc.mo_coeff[:, space.n_core:space.n_core + space.n_orbitals]
            if _is_pi_state(mol, act, _active_occupations(mc, space, mc.ci)):
                weights = (0.5, 0.5)
                first = mc.mo_coeff
                mc = _cas_object(mf, space, spin, weights)
                _kernel(mc, first)
    except (np.linalg.LinAlgError, ValueError, RuntimeError) as exc:
        return PointResult(r_bohr, float("nan"), False, 0, reason=f"CASSCF raised {exc!r}"), prev_active
    ci = mc.ci
    energy = float(mc.e_states[0]) if weights else float(mc.e_tot)
    ok = bool(mc.converged) and math.isfinite(energy)
    occ_act = _active_occupations(mc, space, ci)
    occ = np.zeros(mc.mo_coeff.shape[1])
    occ[: space.n_core] = 2.0
    occ[space.n_core:space.n_core + space.n_orbitals] = occ_act
    reason = None if ok else "CASSCF did not converge"
    if ok and prev_active is not None:
        act = mc.mo_coeff[:, space.n_core:space.n_core + space.n_orbitals]
        s = np.linalg.svd(prev_active.T @ overlap(mol) @ act, compute_uv=False)
        before = np.sort(np.asarray(start["occ"])[space.n_core:space.n_core + space.n_orbitals]) if start.get("occ") is not None else None
        jump = float(np.max(np.abs(np.sort(occ_act) - before))) if before is not None and len(before) == len(occ_act) else 0.0
        if s.min() < OVERLAP_MIN:
            ok, reason = False, (f"the active orbitals changed: their overlap with the previous point's is {s.min():.2f}"
                                 f" (below {OVERLAP_MIN})")
        elif jump > OCCUPATION_JUMP:
            ok, reason = False, f"a natural occupation jumped by {jump:.2f} from the previous point (a root flip)"
    ci_arr = np.asarray(ci if not weights else np.stack([np.asarray(c) for c in ci]))
    e_orb = np.asarray(mc.mo_energy) if mc.mo_energy is not None else np.zeros(len(occ))
    warm = {"mo": np.asarray(mc.mo_coeff), "occ": occ, "e": e_orb, "ci": ci_arr, "r": np.array([r_bohr]),
            "weights": np.asarray(weights if weights else (1.0,))}
    return PointResult(r_bohr, energy, ok, 0, None, "none", "not checked", reason,
                       {"reference": energy}, warm, None, None, (e_orb, np.asarray(mc.mo_coeff), occ)), prev_active


def nevpt2_energy(mol, space: ActiveSpace, spin: int, warm) -> tuple[float, float]:
    """(CASCI energy of the first root on the stored CASSCF orbitals, its strongly contracted NEVPT2
    correlation energy). The CASCI starts from the stored CI vectors, so that it lands on the CASSCF's own
    root: from a default guess the Davidson solver can settle on another root of the same spin near
    dissociation (O2 past 1.9 A, by up to 0.02 Eh). A state-averaged reference takes a multi-root CASCI, as
    PySCF's NEVPT2 needs."""
    from pyscf import mrpt

    weights = tuple(np.asarray(warm.get("weights", (1.0,))).tolist())
    weights = weights if len(weights) > 1 else None
    ci = np.asarray(warm["ci"]) if warm.get("ci") is not None else None
    ci0 = None if ci is None else ([c for c in ci] if weights else ci)
    mf = _shell_scf(mol, spin)
    mc = _cas_object(mf, space, spin, weights, casci=True)
    mc.kernel(np.asarray(warm["mo"]), ci0=ci0)
    e_ref = float(np.ravel(mc.e_tot)[0])
    pt = mrpt.NEVPT(mc, root=0)
    pt.verbose = 0
    return e_ref, float(pt.kernel())


# --- what the natural orbitals say ------------------------------------------------------------------------

class _NaturalOrbitals:
    """What :func:`lcao.analysis.orbitals.analyse` reads of an SCF object, from a CASSCF point's natural
    orbitals: the orbitals, their occupations (0 to 2), orbital energies (the CASSCF Fock diagonal) and the
    one-particle density."""

    #: read by :func:`lcao.analysis.orbitals._spin_sets`: one set of orbitals with fractional occupations
    natural = True

    def __init__(self, mol, mo, occ, energies, multiplicity):
        self.mol = mol
        self.mo_coeff = np.asarray(mo)
        self.mo_occ = np.asarray(occ, float)
        self.mo_energy = np.asarray(energies, float)
        s = (multiplicity - 1) / 2.0
        self._s2 = s * (s + 1)
        self._mult = multiplicity

    def make_rdm1(self, *a, **k):
        return (self.mo_coeff * self.mo_occ) @ self.mo_coeff.T

    def spin_square(self):
        return self._s2, float(self._mult)


def analyse_natural(mol, space: ActiveSpace, multiplicity: int, warm):
    """The orbital analysis of a CASSCF point from its natural orbitals: characters and compositions as for
    SCF orbitals, the effective bond order (bonding minus antibonding natural occupations, over two), the
    weight of the leading configuration, the unpaired electrons of the spin, and the state's term."""
    from ..analysis.orbitals import analyse
    from .molecule import overlap

    mo, occ, e = np.asarray(warm["mo"]), np.asarray(warm["occ"]), np.asarray(warm["e"])
    s = overlap(mol)
    fock = s @ (mo * e) @ mo.T @ s
    a = analyse(_NaturalOrbitals(mol, mo, occ, e, multiplicity), ncore=space.n_core, fock=fock)
    ci = np.asarray(warm["ci"])
    weights = np.ravel(warm.get("weights", (1.0,)))
    first = ci[0] if len(weights) > 1 else ci
    act = slice(space.n_core, space.n_core + space.n_orbitals)
    term = state_term(mol, mo[:, act], first, space.nelecas, multiplicity)
    active = [m for m in a.orbitals if space.n_core <= m.index < space.n_core + space.n_orbitals]
    open_ = sorted(active, key=lambda m: abs(m.occupation - 1.0))[: space.alpha - space.beta]
    natural = {
        "active_space": space.text,
        "core_orbitals": space.n_core,
        "state": term["term"],
        "state_check": term["expectations"],
        "averaged": ("the two components of the Pi state, equal weights" if len(weights) > 1 else None),
        "effective_bond_order": a.mo_count_bond_order,
        "leading_configuration_weight": float(np.max(np.asarray(first) ** 2)),
        "natural_occupations": [{"label": m.label, "kind": m.kind, "occupation": round(m.occupation, 5),
                                 "formal_class": m.formal_class, "main_components": m.main_components()}
                                for m in active],
    }
    exact = (multiplicity - 1) / 2.0 * ((multiplicity - 1) / 2.0 + 1)
    return replace(a, n_alpha=space.alpha + space.n_core, n_beta=space.beta + space.n_core, s2=exact, s2_exact=exact,
                   unpaired_orbitals=tuple(m.label or f"orbital {m.index}" for m in open_), natural=natural,
                   reference="CASSCF natural orbitals")
