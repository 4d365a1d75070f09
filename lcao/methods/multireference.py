"""Multiconfigurational levels: CASSCF and NEVPT2 on a valence active space (PySCF's mcscf and mrpt).

**Active space.** By default the full valence space of the two atoms: the valence s and p orbitals of each
atom (the s alone for H and He) and every electron outside the atoms' noble-gas cores (10 electrons in 8
orbitals for N2, 12 in 8 for O2, 2 in 2 for H2). At a point with no earlier orbitals to start from, the
active orbitals are chosen from an SCF solution (RHF, or ROHF for open shells) by how much of them lies in
the atoms' valence AOs (the measure of AVAS, Sayfutyarova, Sun, Chan & Knizia, J. Chem. Theory Comput. 13,
4063 (2017), with STO-3G as the valence set because it has the valence p functions of Li and Be too): the
occupied orbitals outside the cores, then as many virtual orbitals as the space needs, the ones most in the
valence AOs, not those in an energy window. A level may name another space, N electrons in M orbitals
(``CASSCF(6,6)/cc-pVDZ`` or ``--active-space 6,6``): the highest occupied orbitals and the most valence-like
virtual ones.

**State.** The spin is enforced (the CI vector has M_S = S, with PySCF's spin penalty against other S). A
state whose pi natural orbitals of one kind are unequally occupied (a Pi state: one component of a
degenerate pair) is averaged over its two components with equal weights, and the outputs say so. The term
(Sigma+/Sigma-/Pi/Delta, g/u) is identified from the CI vector under the molecule's symmetry operations
(:func:`state_term`).

**Following.** The curve is swept outward and inward from equilibrium; where that sweep leaves a point
untrusted or ends more than 1 mEh above the separated atoms (a higher root followed outward), it is also swept
inward from the longest distance (which starts afresh from an SCF solution there), and each distance keeps the
lowest trusted energy. Each
point starts from the previous point's natural orbitals projected onto the new geometry (PySCF's
``project_init_guess``). A point whose active orbitals overlap the projected previous ones by less than
:data:`OVERLAP_MIN` (an orbital rotated out of the active space), or whose natural occupations jump by more
than :data:`OCCUPATION_JUMP` (a root flip), or that does not converge, is solved again from an SCF start and
kept if that solution is continuous and no higher; otherwise it is flagged with the reason, and the protocol
retries it from its neighbour on the other side (:class:`lcao.methods.base.StatePlan` ``retry_flagged``).

**NEVPT2** is the strongly contracted second-order n-electron valence state perturbation theory of Angeli,
Cimiraglia, Evangelisti, Leininger and Malrieu (J. Chem. Phys. 114, 10252 (2001)) on the CASSCF points of the
same basis and active space (stored under the CASSCF level and shared by both), like a correlated level on
its reference. PySCF's NEVPT2 correlates every electron (it has no frozen core).
"""

from __future__ import annotations

from dataclasses import replace

from ..errors import LevelError
from .active_space import BRANCH, OUTLIER_TOL_HARTREE, CONV_TOL, SECONDS_CC_PVDZ, ActiveSpace, active_space
from .base import AtomResult, Capabilities, Method, PointResult, StatePlan, Target
from .casscf_point import analyse_natural, nevpt2_energy, solve_point

# --- the methods ----------------------------------------------------------------------------------------

class CompleteActiveSpace(Method):
    """CASSCF (see the module docstring)."""

    names = ("CASSCF",)
    capabilities = Capabilities(stability=False, orbitals=True, spin_square=False, components=("reference",))
    #: levels of this family may name an active space (lcao.levels.parse_level)
    takes_active_space = True

    def state_plan(self, level, multiplicity: int) -> StatePlan:
        return StatePlan(BRANCH, {BRANCH: "CASSCF"}, from_atoms=True, retry_flagged=True, atoms_sweep_if_needed=True,
                         outlier_tol_hartree=OUTLIER_TOL_HARTREE)

    def check(self, level, species, multiplicity) -> None:
        mult = species.lowest_multiplicity() if multiplicity is None else multiplicity
        space = active_space(species.atoms, species.charge, mult - 1, level.active_space)
        nao = self.basis_size(Target(species.atoms, species.charge, mult, level))
        if space.n_core + space.n_orbitals > nao:
            raise LevelError(f"{space.text} with {space.n_core} core orbitals needs {space.n_core + space.n_orbitals}"
                             f" orbitals, more than {level.basis} offers on {species.formula_neutral} ({nao})")

    def _space(self, target: Target) -> ActiveSpace:
        return active_space(target.atoms, target.charge, target.spin, target.level.active_space)

    def _molecule(self, target: Target, r_bohr: float):
        from .molecule import build_molecule

        return build_molecule(target.atoms, r_bohr, target.level, target.charge, target.spin)

    def extrapolate(self, history, r_bohr):
        """The last point's orbitals (projected at the next point): orbitals carry arbitrary signs and
        rotations between points, so no polynomial goes through them."""
        return history[-1][1]

    def point(self, target, r_bohr, branch, start, check_instability=False) -> PointResult:
        try:
            space = self._space(target)
        except LevelError as exc:
            return PointResult(float(r_bohr), float("nan"), False, 0, reason=str(exc))
        mol = self._molecule(target, r_bohr)
        return solve_point(mol, space, target.spin, start, float(r_bohr))

    def atom(self, symbol, charge, spin, level) -> AtomResult:
        from ..species import atomic_number
        from .molecule import build_atom

        if atomic_number(symbol) - charge == 0:
            return AtomResult(symbol, charge, 0, 0.0, True, {}, {"reference": 0.0})
        mol = build_atom(symbol, level, charge, spin)
        space = active_space((symbol,), charge, spin)
        p = solve_point(mol, space, spin, None, 0.0, atom=True)
        return AtomResult(symbol, charge, spin, p.energy, p.converged, dict(p.warm), {"reference": p.energy})

    def fragment_start(self, target, a, b, flip):
        return {}

    def analyse(self, target, point, branch):
        return analyse_natural(self._molecule(target, point.r_bohr), self._space(target), target.multiplicity,
                               point.warm)

    def basis_size(self, target) -> int:
        return int(self._molecule(target, 2.0).nao)

    def seconds_per_point(self, basis_size: int) -> float:
        return SECONDS_CC_PVDZ * (max(basis_size, 1) / 28.0) ** 4

    def describe(self, level) -> dict:
        return {
            "method": "CASSCF",
            "active_space": ("full valence (valence s and p of each atom, s alone for H and He; every electron"
                             " outside the noble-gas cores)") if level.active_space is None else
                            f"{level.active_space[0]} electrons in {level.active_space[1]} orbitals",
            "state": "the spin enforced; a Pi state averaged over its two components with equal weights",
            "orbitals": self.orbitals_note(level),
            "convergence": {"energy_hartree": CONV_TOL},
        }

    def orbitals_note(self, level) -> str:
        return "natural orbitals of the CASSCF wavefunction (occupations between 0 and 2)"

    def caution(self, level) -> str:
        return ("CASSCF holds the static correlation that breaks a bond but almost none of the dynamic correlation:"
                " its dissociation energies are typically 1-2 eV too small for multiple bonds, and its curves are"
                " for shape and bond order, not for numbers. Results that feed a process, kinetics or safety model"
                " need validated data (evaluated tables) and the judgement of licensed practice.")


class Nevpt2(Method):
    """Strongly contracted NEVPT2 on the CASSCF points of the same basis and active space."""

    names = ("NEVPT2",)
    capabilities = Capabilities(stability=False, orbitals=True, spin_square=False,
                                components=("reference", "correlation"))
    takes_active_space = True

    def _cas(self) -> CompleteActiveSpace:
        from . import method_named

        return method_named("CASSCF")

    def reference_level(self, level):
        return replace(level, method="CASSCF", frozen_core=None)

    def _ref_target(self, target):
        return Target(target.atoms, target.charge, target.multiplicity, self.reference_level(target.level))

    def state_plan(self, level, multiplicity):
        plan = self._cas().state_plan(self.reference_level(level), multiplicity)
        return replace(plan, reference={BRANCH: "NEVPT2 on CASSCF"})

    def check(self, level, species, multiplicity):
        self._cas().check(self.reference_level(level), species, multiplicity)

    def extrapolate(self, history, r_bohr):
        return history[-1][1]

    def point(self, target, r_bohr, branch, start, check_instability=False):
        ref = self._cas().point(self._ref_target(target), r_bohr, branch, start)
        return self.on_reference(target, ref, branch)

    def on_reference(self, target, ref, branch, fine=True):
        if not ref.converged:
            return replace(ref, energy=float("nan"), components={"reference": ref.energy})
        cas = self._cas()
        rt = self._ref_target(target)
        mol = cas._molecule(rt, ref.r_bohr)
        e_ref, e_corr = nevpt2_energy(mol, cas._space(rt), target.spin, ref.warm)
        return replace(ref, energy=e_ref + e_corr, components={"reference": e_ref, "correlation": e_corr})

    def atom(self, symbol, charge, spin, level):
        from ..species import atomic_number
        from .molecule import build_atom

        a = self._cas().atom(symbol, charge, spin, self.reference_level(level))
        if not a.converged or atomic_number(symbol) == charge:
            return a
        mol = build_atom(symbol, level, charge, spin)
        e_ref, e_corr = nevpt2_energy(mol, active_space((symbol,), charge, spin), spin, a.warm)
        return replace(a, energy_hartree=e_ref + e_corr, components={"reference": e_ref, "correlation": e_corr})

    def fragment_start(self, target, a, b, flip):
        return {}

    def analyse(self, target, point, branch):
        return self._cas().analyse(self._ref_target(target), point, branch)

    def basis_size(self, target):
        return self._cas().basis_size(self._ref_target(target))

    def seconds_per_point(self, basis_size):
        return 1.3 * self._cas().seconds_per_point(basis_size)

    def orbitals_note(self, level):
        return "natural orbitals of the CASSCF reference (occupations between 0 and 2)"

    def describe(self, level):
        return {**self._cas().describe(self.reference_level(level)), "method": "NEVPT2 (strongly contracted)",
                "correlated_electrons": "all electrons (PySCF's NEVPT2 has no frozen core)",
                "orbitals": self.orbitals_note(level)}

    def caution(self, level):
        return ("NEVPT2 on a full-valence CASSCF gives curves that dissociate correctly, with D_e of first-row"
                " diatomics typically within 0.1-0.4 eV in a triple-zeta basis (more in double-zeta); the active"
                " space and the basis limit it. Results that feed a process, kinetics or safety model need"
                " validated data (evaluated tables) and the judgement of licensed practice.")
