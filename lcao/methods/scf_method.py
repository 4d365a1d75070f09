"""What Hartree-Fock and Kohn-Sham DFT share as methods: self-consistent solutions followed along a
curve, with the rescue ladder, stability following and the restricted -> unrestricted instability.

A level asks for a reference choice: 'auto' (restricted for a closed-shell singlet, followed through the
well and checked at every point for an instability towards the unrestricted solution, whose
broken-symmetry branch is computed from there on; unrestricted otherwise), or one reference ('RHF',
'UHF', 'ROHF'; a restricted closed-shell reference reports an instability but does not follow it).
Separated atoms are unrestricted, without symmetry, the lower of two starting guesses (PySCF's 'minao'
and 'atom'), stability followed: the lowest unrestricted solution of the Hund's-rule spin.
"""

from __future__ import annotations

import numpy as np

from ..errors import LevelError
from .base import SYMMETRIC_SUFFIX, AtomResult, Capabilities, Method, PointResult, StatePlan, Target, base_branch, \
    is_symmetric


class SelfConsistentField(Method):
    """The shared part of :class:`lcao.methods.hf.HartreeFock` and :class:`lcao.methods.dft.KohnSham`."""

    capabilities = Capabilities(stability=True, orbitals=True, spin_square=True, components=("reference",))
    #: the names outputs show for the three references
    labels = {"RHF": "RHF", "UHF": "UHF", "ROHF": "ROHF"}

    def choice(self, level) -> str:
        """'auto', 'RHF', 'UHF' or 'ROHF' for this level."""
        raise NotImplementedError

    def xc(self, level) -> str | None:
        """The functional (None: Hartree-Fock)."""
        return None

    def state_plan(self, level, multiplicity: int) -> StatePlan:
        ref = self.choice(level)
        lab = self.labels
        if ref == "auto":
            if multiplicity == 1:
                return StatePlan("restricted", {"restricted": lab["RHF"], "unrestricted": lab["UHF"]}, True, "unrestricted",
                                 atoms_sweep_if_needed=True)
            return StatePlan("unrestricted", {"unrestricted": lab["UHF"]}, atoms_sweep_if_needed=True)
        if ref == "RHF":
            return StatePlan("restricted", {"restricted": lab["RHF"]}, True, None)
        if ref == "UHF":
            return StatePlan("unrestricted", {"unrestricted": lab["UHF"]}, atoms_sweep_if_needed=True)
        return StatePlan("restricted", {"restricted": lab["ROHF"]}, atoms_sweep_if_needed=True)

    def fixed_multiplicity(self, level, species) -> int | None:
        """A restricted closed-shell reference has one choice: the singlet."""
        return species.lowest_multiplicity() if self.choice(level) == "RHF" else None

    def check(self, level, species, multiplicity: int | None) -> None:
        mult = species.lowest_multiplicity() if multiplicity is None else multiplicity
        if self.choice(level) == "RHF" and mult != 1:
            raise LevelError(
                f"{level.method} needs a closed-shell singlet, but multiplicity is {mult};"
                f" use the unrestricted or restricted open-shell form for open shells"
            )

    def _reference(self, target: Target, branch: str) -> str:
        """'RHF', 'UHF' or 'ROHF' (the Kohn-Sham classes of the same shape where a functional is set)."""
        ref = self.choice(target.level)
        if ref == "auto":
            return "RHF" if (base_branch(branch) == "restricted" and target.multiplicity == 1) else "UHF"
        return ref

    def _molecule(self, target: Target, r_bohr: float, symmetric: bool = False):
        from .molecule import build_molecule

        return build_molecule(target.atoms, r_bohr, target.level, target.charge, target.spin, symmetric)

    def symmetric_branch(self, level, branch: str) -> str | None:
        return None if is_symmetric(branch) else branch + SYMMETRIC_SUFFIX

    def spatial_breaking(self, target, point) -> float | None:
        from ..analysis.symmetry import off_symmetry_electrons, symmetry_basis
        from .molecule import overlap

        dm = point.warm.get("dm") if point.warm else None
        if dm is None or not point.converged:
            return None
        mol = self._molecule(target, point.r_bohr)
        return off_symmetry_electrons(np.asarray(dm), overlap(mol), symmetry_basis(mol))

    def point(self, target, r_bohr, branch, start, check_instability=False) -> PointResult:
        from .scf import orbitals_of, solve, spin_square, unstable_towards_uhf

        ref = self._reference(target, branch)
        xc = self.xc(target.level)
        mol = self._molecule(target, r_bohr, is_symmetric(branch))
        dm0 = None if not start else start.get("dm")
        if dm0 is not None:
            dm0 = np.asarray(dm0)
            if dm0.shape[-1] != mol.nao:
                dm0 = None
            elif ref == "RHF" and dm0.ndim == 3:
                dm0 = dm0.sum(axis=0)
        sol = solve(mol, ref, dm0, xc=xc)
        towards, along = None, None
        if check_instability and sol.converged:
            unstable, dm = unstable_towards_uhf(sol.scf)
            if unstable:
                towards, along = "unrestricted", {"dm": dm}
        s2 = spin_square(sol.scf) if ref == "UHF" and sol.scf is not None else None
        return PointResult(
            float(r_bohr), sol.energy, sol.converged, sol.cycles, s2, sol.rescue, sol.stability, sol.reason,
            {"reference": sol.energy}, {"dm": sol.dm}, towards, along,
            orbitals_of(sol.scf) if sol.converged and sol.scf is not None else None,
        )

    def instability_start(self, target, point, branch):
        """Re-converge the stored restricted density (no stability following) and take the start along
        its restricted -> unrestricted instability."""
        from .scf import solve, unstable_towards_uhf

        mol = self._molecule(target, point.r_bohr)
        dm = np.asarray(point.warm["dm"])
        sol = solve(mol, "RHF", dm.sum(axis=0) if dm.ndim == 3 else dm, follow_stability=False,
                    xc=self.xc(target.level))
        if not sol.converged:
            return None
        unstable, start = unstable_towards_uhf(sol.scf)
        return {"dm": start} if unstable else None

    def atom(self, symbol, charge, spin, level) -> AtomResult:
        from ..species import atomic_number
        from .molecule import build_atom
        from .scf import make_scf, solve

        xc = self.xc(level)
        if atomic_number(symbol) - charge == 0:
            mol = build_atom(symbol, level, charge, 0)
            return AtomResult(symbol, charge, 0, 0.0, True, {"dm": np.zeros((2, mol.nao, mol.nao))}, {"reference": 0.0})
        mol = build_atom(symbol, level, charge, spin)
        best = None
        for guess in ("minao", "atom"):
            mf0 = make_scf(mol, "UHF", xc=xc)
            try:
                dm0 = mf0.get_init_guess(mol, guess)
            except Exception:  # some guesses are unavailable for some elements
                continue
            sol = solve(mol, "UHF", dm0, xc=xc)
            if sol.converged and (best is None or sol.energy < best.energy - 1e-10):
                best = sol
        converged = best is not None
        if best is None:
            best = solve(mol, "UHF", None, xc=xc)
        return AtomResult(symbol, charge, spin, best.energy, converged, {"dm": best.dm}, {"reference": best.energy})

    def ghost_atom(self, atom, level, partner, r_bohr, first):
        """The atom in the dimer basis, started from its own density (zeros on the ghost's functions)."""
        from scipy.linalg import block_diag

        from dataclasses import replace

        from ..species import atomic_number
        from .molecule import build_with_ghost
        from .scf import solve

        if atomic_number(atom.symbol) == atom.charge:  # a bare nucleus
            return atom
        symbols = (atom.symbol, partner) if first else (partner, atom.symbol)
        mol = build_with_ghost(symbols, r_bohr, level, atom.charge, atom.spin, 0 if first else 1)
        own = np.asarray(atom.warm["dm"])
        pad = np.zeros((mol.nao - own.shape[-1],) * 2)
        start = np.array([block_diag(own[k], pad) if first else block_diag(pad, own[k]) for k in (0, 1)])
        sol = solve(mol, "UHF", start, xc=self.xc(level))
        return replace(atom, energy_hartree=float(sol.energy), converged=sol.converged, warm={"dm": sol.dm},
                       components={"reference": float(sol.energy)})

    def fragment_start(self, target, a, b, flip):
        """Block-diagonal (alpha, beta) density of the two atoms."""
        from scipy.linalg import block_diag

        da = np.asarray(a.warm["dm"])
        db = np.asarray(b.warm["dm"])
        if flip == "a":
            da = da[::-1]
        elif flip == "b":
            db = db[::-1]
        return {"dm": np.array([block_diag(da[0], db[0]), block_diag(da[1], db[1])])}

    def analyse(self, target, point, branch):
        return analyse_solution(self._molecule(target, point.r_bohr), self._reference(target, branch),
                                np.asarray(point.warm["dm"]), point.orbitals, self.xc(target.level))

    def atom_levels(self, atom, level) -> tuple:
        from .molecule import build_atom

        mol = build_atom(atom.symbol, level, atom.charge, atom.spin)
        if mol.nelectron == 0:
            return ()
        return atom_orbital_levels(mol, np.asarray(atom.warm["dm"]), self.xc(level))

    def basis_size(self, target) -> int:
        return int(self._molecule(target, 2.0).nao)


#: largest change of the density on rebuilding a stored point's orbitals before it is re-converged
REBUILD_TOL = 1e-5


def _fock_from_orbitals(s, orbitals):
    """F = S C diag(e) C^T S: the Fock matrix whose eigenvectors are the given canonical orbitals."""
    e, c, _ = orbitals
    if np.asarray(c).ndim == 3:
        return np.array([s @ (c[k] * e[k]) @ c[k].T @ s for k in (0, 1)])
    return s @ (c * e) @ c.T @ s


def analyse_solution(mol, reference: str, dm, orbitals=None, xc: str | None = None):
    """Analyse a converged SCF solution given by its density ``dm`` (and its orbitals
    (mo_energy, mo_coeff, mo_occ) where the run kept them): from the orbitals directly (their Fock
    matrix is S C e C^T S; no two-electron integrals are needed), or else from one diagonalisation of
    the Fock matrix of the density, re-converged only if that does not reproduce the density."""
    from ..analysis.orbitals import analyse
    from .scf import make_scf, solve

    dm = np.asarray(dm)
    if reference == "RHF" and dm.ndim == 3:
        dm = dm.sum(axis=0)
    kept = orbitals is not None and np.asarray(orbitals[1]).ndim == (3 if reference == "UHF" else 2)
    mf = make_scf(mol, reference, two_electron=not kept, xc=xc)
    if kept:
        mf.mo_energy, mf.mo_coeff, mf.mo_occ = orbitals
        fock = _fock_from_orbitals(mf.get_ovlp(), orbitals)
    else:
        fock = mf.get_fock(dm=dm)
        mf.mo_energy, mf.mo_coeff = mf.eig(fock, mf.get_ovlp())
        mf.mo_occ = mf.get_occ(mf.mo_energy, mf.mo_coeff)
    if np.max(np.abs(np.asarray(mf.make_rdm1()) - dm)) > REBUILD_TOL:
        sol = solve(mol, reference, dm, follow_stability=False, xc=xc)
        if not sol.converged:
            from ..errors import CalculationError

            raise CalculationError(f"the point at {mol.atom_coord(1)[2]:.4f} bohr did not re-converge for analysis")
        return analyse(sol.scf)
    if xc is None:
        # E = 1/2 tr[P (h + F)] per spin, from the Fock matrix at hand (no second Coulomb/exchange build)
        h = mf.get_hcore()
        fk = np.asarray(fock)
        if dm.ndim == 3:
            e_el = 0.5 * sum(float(np.einsum("ij,ji->", dm[k], h + fk[k])) for k in (0, 1))
        else:
            e_el = 0.5 * float(np.einsum("ij,ji->", dm, h + fk))
        mf.e_tot = e_el + mol.energy_nuc()
    mf.converged = True
    return analyse(mf, fock=fock)


def atom_orbital_levels(mol, dm, xc: str | None = None) -> tuple:
    """Orbital energies of an atom from its (alpha, beta) density: ((shell, spin, energy, occupation), ...)."""
    from scipy.linalg import eigh

    from .scf import make_scf

    mf = make_scf(mol, "UHF", xc=xc)
    dm = np.asarray(dm)
    fock = mf.get_fock(dm=dm)
    s = mf.get_ovlp()
    labels = mol.ao_labels(fmt=False)
    rows = []
    for k, spin in enumerate(("alpha", "beta")):
        e, c = eigh(fock[k], s)
        occ_n = int(round(float(np.trace(dm[k] @ s))))
        for j in range(len(e)):
            w = c[:, j] * (s @ c[:, j])
            shell = labels[int(np.argmax(np.abs(w)))][2]
            rows.append((shell, spin, float(e[j]), 1.0 if j < occ_n else 0.0))
    return tuple(rows)
