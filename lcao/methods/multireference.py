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

**Following.** Each point starts from the previous point's natural orbitals projected onto the new geometry
(PySCF's ``project_init_guess``). A point whose active orbitals overlap the projected previous ones by less
than :data:`OVERLAP_MIN` (an orbital rotated out of the active space), or whose natural occupations jump by
more than :data:`OCCUPATION_JUMP` (a root flip), is flagged with the reason; the protocol retries it from its
neighbour on the other side before giving up (:class:`lcao.methods.base.StatePlan` ``retry_flagged``).

**NEVPT2** is the strongly contracted second-order n-electron valence state perturbation theory of Angeli,
Cimiraglia, Evangelisti, Leininger and Malrieu (J. Chem. Phys. 114, 10252 (2001)) on the CASSCF points of the
same basis and active space (stored under the CASSCF level and shared by both), like a correlated level on
its reference. PySCF's NEVPT2 correlates every electron (it has no frozen core).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..errors import LevelError
from .base import AtomResult, Capabilities, Method, PointResult, StatePlan, Target

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

def _operation_overlap(mol, operation, level: int = 4) -> np.ndarray:
    """M[mu, nu] = integral of chi_mu(r) chi_nu(op r) over space (PySCF's integration grid): the AO
    representation of a point operation op (an involution or a rotation), so that an orbital's image is
    represented in the MO basis by C^T M C."""
    from pyscf.dft import gen_grid, numint

    g = gen_grid.Grids(mol)
    g.level = level
    g.build(with_non0tab=False)
    a = numint.eval_ao(mol, g.coords)
    b = numint.eval_ao(mol, operation(g.coords))
    return (a * g.weights[:, None]).T @ b


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
    norb = mo_active.shape[1]
    got = {}
    for name, op in ops.items():
        if name == "inversion" and not homonuclear:
            continue
        u = mo_active.T @ _operation_overlap(mol, op) @ mo_active
        got[name] = _expectation(ci, norb, nelecas, u)
    rot = got["rotation_90"]
    lam = 0 if rot > 0.5 else (2 if rot < -0.5 else 1)
    text = f"{multiplicity}{LAMBDA_NAMES[lam]}"
    if homonuclear:
        text += "_g" if got["inversion"] > 0 else "_u"
    if lam == 0:
        text += "+" if got["reflection_xz"] > 0 else "-"
    return {"term": text, "expectations": {k: round(v, 4) for k, v in got.items()}}


# --- the methods ----------------------------------------------------------------------------------------

class CompleteActiveSpace(Method):
    """CASSCF (see the module docstring)."""

    names = ("CASSCF",)
    capabilities = Capabilities(stability=False, orbitals=True, spin_square=False, components=("reference",))
    #: levels of this family may name an active space (lcao.levels.parse_level)
    takes_active_space = True

    def state_plan(self, level, multiplicity: int) -> StatePlan:
        return StatePlan(BRANCH, {BRANCH: "CASSCF"}, from_atoms=False, retry_flagged=True)

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

    def on_reference(self, target, ref, branch):
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
    solution; the continuity checks against the start (see the module docstring). Never raises for a
    convergence failure."""
    from pyscf import mcscf

    from .molecule import overlap
    from .scf import solve

    mf = _shell_scf(mol, spin)
    weights = None
    prev_active = None
    usable = bool(start) and start.get("mo") is not None and np.shape(start["mo"])[0] == mol.nao
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
                return PointResult(r_bohr, float("nan"), False, sol.cycles, reason="the SCF start did not converge")
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
        return PointResult(r_bohr, float("nan"), False, 0, reason=f"CASSCF raised {exc!r}")
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
                       {"reference": energy}, warm, None, None, (e_orb, np.asarray(mc.mo_coeff), occ))


def nevpt2_energy(mol, space: ActiveSpace, spin: int, warm) -> tuple[float, float]:
    """(CASCI energy of the first root on the stored CASSCF orbitals, its strongly contracted NEVPT2
    correlation energy). A state-averaged reference takes a multi-root CASCI, as PySCF's NEVPT2 needs."""
    from pyscf import mrpt

    weights = tuple(np.asarray(warm.get("weights", (1.0,))).tolist())
    weights = weights if len(weights) > 1 else None
    mf = _shell_scf(mol, spin)
    mc = _cas_object(mf, space, spin, weights, casci=True)
    mc.kernel(np.asarray(warm["mo"]))
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
