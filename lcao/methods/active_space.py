"""The active space of a multiconfigurational level and the state it describes: the full-valence default
chosen by valence-AO projection, an override, the first point's orbitals, and the term of a CI vector
(see :mod:`lcao.methods.multireference`)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import LevelError

#: the one branch a multiconfigurational curve follows
BRANCH = "multireference"
CONV_TOL = 1e-9
#: macro iterations of the second attempt at a point that did not converge in PySCF's default 50
RETRY_MACRO_CYCLES = 150
#: smallest singular value of the overlap between a point's active orbitals and the previous point's
#: (projected onto the new geometry) before the point counts as discontinuous
OVERLAP_MIN = 0.9
#: largest change of a natural occupation between neighbouring points before it counts as a jump
OCCUPATION_JUMP = 0.5
#: a point of a CASSCF or NEVPT2 curve lying this far above the smooth curve through its neighbours is
#: flagged (hartree; Hartree-Fock allows 5 mEh): near a crossing of states several CASSCF solutions lie a
#: few mEh apart, and the higher one is a visible kink (0.1 eV) that the fresh start usually removes
OUTLIER_TOL_HARTREE = 1e-3
#: two pi natural orbitals of one kind whose occupations differ by more than this: a Pi state
PI_SPLIT = 0.5
#: the basis whose valence functions measure how valence-like an orbital is
VALENCE_BASIS = "STO-3G"
#: measured (2 cores, PySCF 2.14): N2 CAS(10,8) 2.4 s a point from scratch in cc-pVDZ (28 functions),
#: about a third of that warm-started
SECONDS_CC_PVDZ = 0.8


def valence_orbitals(z: int) -> int:
    """Valence orbitals of an atom in the default active space: s alone for H and He, s and p otherwise."""
    return 1 if z <= 2 else 4


@dataclass(frozen=True)
class ActiveSpace:
    """An active space for one molecule (or atom) and spin.

    Attributes:
        n_core: doubly occupied inactive orbitals; n_orbitals, n_electrons: the active space;
        alpha, beta: active electrons of each spin (M_S = S).
    """

    n_core: int
    n_orbitals: int
    n_electrons: int
    alpha: int
    beta: int

    @property
    def nelecas(self) -> tuple[int, int]:
        return (self.alpha, self.beta)

    @property
    def text(self) -> str:
        return f"CAS({self.n_electrons},{self.n_orbitals})"


def active_space(symbols, charge: int, spin: int, override=None) -> ActiveSpace:
    """The active space of atoms ``symbols`` with net charge and 2S = ``spin``: the full valence space by
    default, or ``override`` = (electrons, orbitals).

    Raises:
        LevelError: more active electrons than the species has, an odd number of electrons left for the
            core, a spin the active electrons cannot have, or more electrons of one spin than orbitals.
    """
    from ..analysis.character import core_orbitals
    from ..species import atomic_number

    z = [atomic_number(s) for s in symbols]
    n_el = sum(z) - charge
    name = f"{symbols[0]}2" if len(symbols) == 2 and symbols[0] == symbols[1] else "".join(symbols)
    if override is None:
        core = sum(core_orbitals(x) for x in z)
        core = min(core, n_el // 2)
        n_orb = sum(valence_orbitals(x) for x in z)
        n_act = n_el - 2 * core
    else:
        n_act, n_orb = (int(x) for x in override)
        if n_act < 0 or n_orb < 1:
            raise LevelError(f"an active space needs at least one orbital and no negative electron count, got {n_act},{n_orb}")
        if n_act > n_el:
            raise LevelError(f"an active space of {n_act} electrons is more than {name} has ({n_el})")
        if (n_el - n_act) % 2:
            raise LevelError(f"{n_act} active electrons leave {n_el - n_act} for the doubly occupied core, an odd number;"
                             " give an active electron count of the other parity")
        core = (n_el - n_act) // 2
    if n_act < spin:
        raise LevelError(f"{n_act} active electrons cannot carry the {spin} unpaired electrons of multiplicity {spin + 1}")
    if (n_act - spin) % 2:
        raise LevelError(f"{n_act} active electrons cannot make multiplicity {spin + 1}: the count and the unpaired"
                         f" electrons ({spin}) must have the same parity (odd or even)")
    alpha, beta = (n_act + spin) // 2, (n_act - spin) // 2
    if alpha > n_orb:
        raise LevelError(f"{alpha} electrons of one spin do not fit in {n_orb} active orbitals")
    return ActiveSpace(core, n_orb, n_act, alpha, beta)


# --- the orbitals of a first point ----------------------------------------------------------------------

def valence_projector(mol) -> np.ndarray:
    """S P S with P the projector onto the atoms' valence functions of :data:`VALENCE_BASIS` (AO basis of
    ``mol``): v^T (S P S) v is how much of orbital v lies in the valence AOs."""
    from pyscf import gto

    from ..analysis.character import period

    ref = gto.Mole()
    ref.atom = mol._atom
    ref.unit = "Bohr"
    ref.basis = VALENCE_BASIS
    ref.charge, ref.spin, ref.verbose = 0, mol.nelectron % 2, 0
    ref.build(dump_input=False, parse_arg=False)
    keep = []
    for i, (ia, _sym, shell, _c) in enumerate(ref.ao_labels(fmt=False)):
        n = period(int(ref.atom_charge(ia)))
        if shell in (f"{n}s", f"{n}p"):
            keep.append(i)
    s12 = gto.intor_cross("int1e_ovlp", mol, ref)[:, keep]
    s22 = ref.intor("int1e_ovlp")[np.ix_(keep, keep)]
    return s12 @ np.linalg.solve(s22, s12.T)


def initial_orbitals(mol, mo, occ, energies, space: ActiveSpace) -> np.ndarray:
    """Orbitals ordered core | active | rest from an SCF solution: the lowest ``n_core`` occupied orbitals as
    core, the other occupied ones active, and the virtual space rotated so that its most valence-like
    combinations (the top eigenvectors of the valence projector in it) fill the active space."""
    mo, occ = np.asarray(mo), np.asarray(occ)
    order = np.argsort(energies, kind="stable")
    occupied = [i for i in order if occ[i] > 0]
    virtual = [i for i in order if occ[i] == 0]
    core = occupied[: space.n_core]
    act_occ = occupied[space.n_core:]
    n_virt = space.n_orbitals - len(act_occ)
    if n_virt < 0:
        # fewer active orbitals than occupied ones outside the core: the lowest of those join the core
        core, act_occ, n_virt = occupied[: len(occupied) - space.n_orbitals], occupied[len(occupied) - space.n_orbitals:], 0
    v = mo[:, virtual]
    w, u = np.linalg.eigh(v.T @ valence_projector(mol) @ v)
    u = u[:, ::-1]  # most valence-like first
    rotated = v @ u
    return np.hstack([mo[:, core], mo[:, act_occ], rotated[:, :n_virt], rotated[:, n_virt:]])


# --- the state ------------------------------------------------------------------------------------------

def _operation_overlaps(mol, operations, level: int = 4) -> list:
    """For each point operation op (an involution or a rotation), M[mu, nu] = integral of chi_mu(r)
    chi_nu(op r) over space (PySCF's integration grid, built once for all of them): the AO representation of
    op, so that an orbital's image is represented in the MO basis by C^T M C."""
    from pyscf.dft import gen_grid, numint

    g = gen_grid.Grids(mol)
    g.level = level
    g.build(with_non0tab=False)
    weighted = (numint.eval_ao(mol, g.coords) * g.weights[:, None]).T
    return [weighted @ numint.eval_ao(mol, op(g.coords)) for op in operations]


def _expectation(ci, norb, nelec, u) -> float:
    from pyscf import fci

    return float(np.dot(np.ravel(ci), np.ravel(fci.addons.transform_ci_for_orbital_rotation(ci, norb, nelec, u))))


LAMBDA_NAMES = {0: "Sigma", 1: "Pi", 2: "Delta"}


def state_term(mol, mo_active, ci, nelecas, multiplicity: int) -> dict:
    """The term of a CI vector on active orbitals of a diatomic on the z axis (atom 0 at the origin).

    Lambda from the rotation by 90 degrees about the axis (expectation cos(90 Lambda): 1 Sigma, 0 Pi, -1
    Delta), Sigma+ or Sigma- from the reflection in the xz plane, g or u from the inversion through the
    midpoint (homonuclear only); each from the CI vector transformed by the orbitals' image under the
    operation (AO representation by quadrature). Returns the term text ('3Sigma_g-') and the expectations.
    """
    r = float(mol.atom_coord(1)[2] - mol.atom_coord(0)[2])
    ops = {
        "rotation_90": lambda c: np.column_stack([c[:, 1], -c[:, 0], c[:, 2]]),
        "reflection_xz": lambda c: np.column_stack([c[:, 0], -c[:, 1], c[:, 2]]),
        "inversion": lambda c: np.column_stack([-c[:, 0], -c[:, 1], r - c[:, 2]]),
    }
    homonuclear = mol.atom_symbol(0) == mol.atom_symbol(1)
    if not homonuclear:
        del ops["inversion"]
    norb = mo_active.shape[1]
    got = {}
    for name, m in zip(ops, _operation_overlaps(mol, list(ops.values()))):
        got[name] = _expectation(ci, norb, nelecas, mo_active.T @ m @ mo_active)
    rot = got["rotation_90"]
    lam = 0 if rot > 0.5 else (2 if rot < -0.5 else 1)
    text = f"{multiplicity}{LAMBDA_NAMES[lam]}"
    if homonuclear:
        text += "_g" if got["inversion"] > 0 else "_u"
    if lam == 0:
        text += "+" if got["reflection_xz"] > 0 else "-"
    return {"term": text, "expectations": {k: round(v, 4) for k, v in got.items()}}
