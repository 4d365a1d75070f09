"""The method interface: what every level of theory implements, and the plain values it hands back.

A *method* (one module per family under :mod:`lcao.methods`) turns a target (two atoms, charge,
multiplicity, level, distance) and a warm start into a :class:`PointResult`, computes the separated
atoms at the same level, and declares what else it can do (:class:`Capabilities`). The scan protocol
asks the method; it never compares reference names. Everything here is a plain value that pickles,
so it crosses process boundaries: no PySCF object leaves the method.

A warm start (:data:`Warm`) is a dict of named arrays: a density matrix for Hartree-Fock, orbitals
and amplitudes or CI vectors for correlated methods. The store keeps it with every point, so a
resumed sweep starts exactly as the uninterrupted one would have.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass, field

import numpy as np

#: the two kinds of solution a curve can follow
BRANCHES = ("restricted", "unrestricted")
#: a branch's symmetry-adapted copy is named ``<branch>`` + this (e.g. 'unrestricted-symmetric')
SYMMETRIC_SUFFIX = "-symmetric"


def base_branch(branch: str) -> str:
    """'unrestricted' of 'unrestricted-symmetric' (a branch name without its symmetry-adapted suffix)."""
    return branch[: -len(SYMMETRIC_SUFFIX)] if branch.endswith(SYMMETRIC_SUFFIX) else branch


def is_symmetric(branch: str) -> bool:
    """Whether ``branch`` is a symmetry-adapted copy (its solutions keep the molecule's spatial symmetry)."""
    return branch.endswith(SYMMETRIC_SUFFIX)

#: name -> array; what a method needs to start the next point (see the module docstring)
Warm = dict


@dataclass(frozen=True)
class Capabilities:
    """What a method can compute beyond the energy; the protocol asks these instead of names.

    Attributes:
        stability: each point's solution is checked for internal instabilities and followed
            to the lowest solution (reported per point as ``stability``).
        orbitals: it gives orbitals for the analysis (characters, bond orders, spin).
        spin_square: it reports <S^2> of unrestricted solutions.
        components: names of the energy components recorded beside the total
            (e.g. ``('reference', 'correlation')``).
    """

    stability: bool
    orbitals: bool
    spin_square: bool
    components: tuple[str, ...]


from ..points import OUTLIER_TOL_HARTREE

#: how far above the separated atoms the sweep from equilibrium may end before a method with
#: ``StatePlan.atoms_sweep_if_needed`` sweeps from the atoms too (hartree; 1 mEh, the size-consistency
#: margin of the curve notes)
ATOMS_GAP_HARTREE = 1e-3


@dataclass(frozen=True)
class StatePlan:
    """How a method follows one state (multiplicity) at one level.

    Attributes:
        primary: the branch followed through the well ('restricted' or 'unrestricted').
        reference: branch -> the name outputs show for it ('RHF', 'UHF', 'ROHF', ...).
        instability_check: every point of the primary branch is checked for an instability
            towards the other branch.
        secondary: the branch computed from the first unstable point outward and from the
            atoms inward (None: an instability is only reported).
        from_atoms: sweeps from the separated atoms inward beside the sweep from equilibrium (a method
            whose atoms give no start for the molecule, such as an active-space one, starts that sweep
            afresh at the longest distance: ``fragment_start`` returns an empty start).
        retry_flagged: a flagged point is computed again from its neighbour on the other side (the
            lower trusted one kept).
        atoms_sweep_if_needed: the sweep from the atoms runs only where the sweep from equilibrium leaves
            an untrusted point or ends more than :data:`ATOMS_GAP_HARTREE` above the separated atoms (a
            higher root followed outward), not beside it.
        outlier_tol_hartree: how far above the smooth curve through its neighbours a point may lie before
            it is flagged (:func:`lcao.points.outlier_reasons`); a method whose solutions of one state lie
            closer together than Hartree-Fock's may ask for less.
    """

    primary: str
    reference: dict
    instability_check: bool = False
    secondary: str | None = None
    from_atoms: bool = True
    retry_flagged: bool = False
    atoms_sweep_if_needed: bool = False
    outlier_tol_hartree: float = OUTLIER_TOL_HARTREE

    @property
    def branches(self) -> tuple[str, ...]:
        return (self.primary,) + ((self.secondary,) if self.secondary else ())


@dataclass(frozen=True)
class Target:
    """What one calculation is about (the distance comes separately).

    Attributes:
        atoms: the two element symbols (the first at the origin, the second on +z).
        charge: net charge; multiplicity: 2S+1.
        level: a :class:`lcao.levels.Level`.
    """

    atoms: tuple[str, str]
    charge: int
    multiplicity: int
    level: object

    @property
    def spin(self) -> int:
        """2S: alpha minus beta electrons."""
        return self.multiplicity - 1


@dataclass(frozen=True)
class PointResult:
    """One converged (or failed) calculation at one distance, as a plain value.

    Attributes:
        r_bohr: distance, bohr.
        energy: total energy, hartree (NaN when nothing converged).
        converged: the method met its convergence criteria (a flag, never an exception).
        cycles: iterations spent, over every attempt.
        s2: <S^2> of an unrestricted solution, else None.
        rescue: which rung of the method's rescue ladder converged it ('none' when the first did).
        stability: 'stable', 'followed N', 'still unstable' or 'not checked'.
        reason: why the point cannot be trusted, or None.
        components: energy components (hartree) named as in :class:`Capabilities`.
        warm: the warm start for the next point (stored).
        unstable_towards: the branch this solution is unstable towards, when checked and found.
        branch_start: a warm start along that instability (kept for the run, not stored).
        orbitals: (mo_energy, mo_coeff, mo_occ) for the analysis (kept for the run, not stored).
    """

    r_bohr: float
    energy: float
    converged: bool
    cycles: int
    s2: float | None = None
    rescue: str = "none"
    stability: str = "not checked"
    reason: str | None = None
    components: dict = field(default_factory=dict)
    warm: Warm = field(default_factory=dict, repr=False, compare=False)
    unstable_towards: str | None = None
    branch_start: Warm | None = field(default=None, repr=False, compare=False)
    orbitals: tuple | None = field(default=None, repr=False, compare=False)

    @property
    def usable(self) -> bool:
        """Converged to a finite energy."""
        return self.converged and math.isfinite(self.energy)


@dataclass(frozen=True)
class AtomResult:
    """One atom (or atomic ion) at the level of theory.

    Attributes:
        symbol, charge: the atom and its charge; spin: 2S.
        energy_hartree: total energy (0 for a bare nucleus).
        converged: whether the calculation converged.
        warm: the atom's warm start in its own basis (for fragment starts of the molecule).
        components: energy components, as for points.
    """

    symbol: str
    charge: int
    spin: int
    energy_hartree: float
    converged: bool
    warm: Warm = field(default_factory=dict, repr=False, compare=False)
    components: dict = field(default_factory=dict)

    @property
    def key(self) -> tuple[str, int, int]:
        return (self.symbol, self.charge, self.spin)

    def as_dict(self) -> dict:
        return {
            "symbol": self.symbol,
            "charge": self.charge,
            "multiplicity": self.spin + 1,
            "energy_hartree": self.energy_hartree,
            "converged": self.converged,
        }


def lagrange_extrapolate(history, r: float) -> Warm:
    """Lagrange extrapolation of every array of the warm starts ``[(r, warm), ...]`` to ``r``.

    The AO basis moves with the nuclei, so a density matrix varies smoothly with the distance;
    through the last m points the guess is accurate to order m in the step (a polynomial of degree
    below m is reproduced exactly). One point, repeated distances or arrays of different shapes give
    the last warm start unchanged.
    """
    rs = [float(x) for x, _ in history]
    last = history[-1][1]
    if len(history) == 1 or len(set(rs)) < len(rs):
        return last
    out = {}
    for name, arr in last.items():
        arrs = [np.asarray(w.get(name)) if w.get(name) is not None else None for _, w in history]
        if any(a is None or a.shape != np.shape(arr) for a in arrs):
            return last
        acc = np.zeros_like(arrs[-1], dtype=float)
        for j, (rj, aj) in enumerate(zip(rs, arrs)):
            w = 1.0
            for m, rm in enumerate(rs):
                if m != j:
                    w *= (r - rm) / (rj - rm)
            acc += w * aj
        out[name] = acc
    return out


class Method(ABC):
    """One family of levels of theory (see the module docstring).

    Subclasses set :attr:`names` (the method names of ``METHOD/BASIS`` they answer to) and
    :attr:`capabilities`, and implement the abstract methods. Register an instance with
    :func:`lcao.methods.register`; nothing in the driver changes.
    """

    #: method names this family answers to (upper case), e.g. ('HF', 'RHF', 'UHF', 'ROHF')
    names: tuple[str, ...] = ()
    capabilities: Capabilities = Capabilities(False, False, False, ())

    def accepts(self, name: str) -> bool:
        """Whether this family computes the method ``name`` (upper case) besides its :attr:`names`
        (a density functional library knows hundreds of names)."""
        return False

    def check_name(self, name: str) -> None:
        """Raise :class:`lcao.errors.LevelError` with the reason when a name this family recognises is not
        offered (e.g. a reference it refuses to correlate)."""

    def frozen_core_default(self, name: str) -> bool | None:
        """True where the method leaves the cores out of the correlation by default, None where that
        does not apply."""
        return None

    def caution(self, level) -> str:
        """What a user must know before putting this level's numbers into a model."""
        return ("These numbers come from one level of theory; results that feed a process, kinetics or"
                " safety model need validated data (evaluated tables, higher-level calculations) and the"
                " judgement of licensed practice.")

    def describe(self, level) -> dict:
        """What exactly the level computes, for the provenance of outputs (the reference, the
        functional as evaluated, the grid, the correlated electrons)."""
        return {}

    def ghost_atom(self, atom: AtomResult, level, partner: str, r_bohr: float, first: bool) -> AtomResult:
        """The atom ``atom`` in the dimer's basis: its partner ``partner`` a ghost at ``r_bohr`` (the atom at
        the origin when ``first``, else at r): the counterpoise correction's atom."""
        raise NotImplementedError(f"{type(self).__name__} gives no counterpoise correction")

    def reference_level(self, level):
        """For a level computed on top of another level's solutions (a correlated method on Hartree-Fock),
        that level: the protocol then follows the reference's solutions at it and adds this method's
        energy at each chosen reference point (:meth:`on_reference`). None: the level is followed itself."""
        return None

    def on_reference(self, target: Target, reference: PointResult, branch: str, fine: bool = True) -> PointResult:
        """This method's point on a converged point of :meth:`reference_level` (same distance and branch).
        ``fine`` is False for a grid point, which only draws the curve: the method may then converge its
        iterations less far (to its library's defaults) than for the points a fit reads."""
        raise NotImplementedError(f"{type(self).__name__} is not computed on a reference")

    def symmetric_branch(self, level, branch: str) -> str | None:
        """The name of the symmetry-adapted copy of ``branch`` (solutions kept in the molecule's point group,
        computed where the lowest solution breaks the spatial symmetry), or None where the method has none.
        :meth:`point` then accepts that name as a branch."""
        return None

    def spatial_breaking(self, target: Target, point: PointResult) -> float | None:
        """How far a point's solution breaks the molecule's spatial symmetry (off-symmetry electrons of its
        total density, :func:`lcao.analysis.symmetry.off_symmetry_electrons`), or None where not measured."""
        return None

    def orbitals_note(self, level) -> str | None:
        """What the analysed orbitals are when they are not this method's own (e.g. the reference's)."""
        return None

    @abstractmethod
    def state_plan(self, level, multiplicity: int) -> StatePlan:
        """How the state of ``multiplicity`` is followed at ``level``."""

    def fixed_multiplicity(self, level, species) -> int | None:
        """The one multiplicity this level allows for ``species`` (no candidates are probed), or None."""
        return None

    def check(self, level, species, multiplicity: int | None) -> None:
        """Raise :class:`lcao.errors.LevelError` before anything is computed when the level cannot
        do this state (``multiplicity`` None: the lowest the electron count allows)."""

    @abstractmethod
    def point(self, target: Target, r_bohr: float, branch: str, start: Warm | None,
              check_instability: bool = False) -> PointResult:
        """Converge one point of ``branch`` from ``start`` (None: the method's own first guess).

        Never raises for a convergence failure: the result says ``converged=False`` with a reason.
        """

    @abstractmethod
    def atom(self, symbol: str, charge: int, spin: int, level) -> AtomResult:
        """The atom (or atomic ion) with 2S = ``spin`` at ``level``, its lowest solution."""

    @abstractmethod
    def fragment_start(self, target: Target, a: AtomResult, b: AtomResult, flip) -> Warm:
        """A warm start of the molecule from its two separated atoms; ``flip`` 'a' or 'b' turns that
        atom's spin over (False: spins parallel)."""

    def instability_start(self, target: Target, point: PointResult, branch: str) -> Warm | None:
        """A warm start of ``branch`` along the instability of a stored point (when the run did not
        keep the one found as it was computed); None when the point is stable after all."""
        return None

    def extrapolate(self, history, r_bohr: float) -> Warm:
        """The warm start at ``r_bohr`` from earlier points ``[(r, warm), ...]`` of the same solution."""
        return lagrange_extrapolate(history, r_bohr)

    def analyse(self, target: Target, point: PointResult, branch: str):
        """Orbital analysis (:class:`lcao.analysis.OrbitalAnalysis`) of a point, for methods with
        ``capabilities.orbitals``."""
        raise NotImplementedError(f"{type(self).__name__} gives no orbitals for the analysis")

    def atom_levels(self, atom: AtomResult, level) -> tuple:
        """Orbital energies of a separated atom: ((shell, spin, energy, occupation), ...)."""
        return ()

    def basis_size(self, target: Target) -> int:
        """Basis functions of the molecule (for thread and chunk choices, and the summary)."""
        return 0

    def seconds_per_point(self, basis_size: int) -> float:
        """A rough cost of one warm-started point, to size tasks before any is measured."""
        return 0.01
