"""Correlated levels on a Hartree-Fock reference: MP2, CCSD and CCSD(T) (PySCF's mp and cc modules).

The protocol follows the reference: Hartree-Fock sweeps in the same basis find the solutions (the same
as an ``HF`` curve, stored under the HF level and shared by every correlated level in that basis), and
this method adds the correlation energy at every chosen reference point (:meth:`Correlated.on_reference`).
Without a prefix the reference is chosen as ``HF`` chooses it: RHF for a closed-shell singlet, with the
broken-symmetry UHF branch past the RHF -> UHF instability (where that branch's reference is lower, its
correlated energy is taken), UHF for open shells. ``R`` and ``U`` prefixes ask for one reference
(``UCCSD(T)``); ``RCCSD`` of an open shell is refused, and no ROHF-based form is offered: PySCF's
UCCSD(T) on an ROHF reference is not semicanonicalised and its (T) is meaningless.

The atoms' noble-gas cores (plus a filled (n-1)d shell from Ga on) are left out of the correlation by
default (frozen core); a level can correlate every electron. Coupled-cluster iterations are converged
to 1e-9 Eh and amplitude changes of 1e-7 where a fit reads the energy (the refinement points about the
minimum, a well level's window, the atoms, single points), and to PySCF's defaults (1e-7 Eh, 1e-5) on the
grid points that draw the curve (N2 in cc-pVDZ: energies within 2e-7 Eh of the tight ones, in two thirds
of the iterations); a point whose SCF or CC iterations do not converge is flagged. The DIIS extrapolation
keeps 12 vectors (PySCF's default 6 took a third more iterations on stretched and broken-symmetry N2).
The amplitudes start from MP2 at every point: starting them from the previous distance's
(projected onto the new orbitals) took as long or longer (CCSD/cc-pVDZ N2, steps of 0.05 A: 0.41 against
0.37 s, 0.32 against 0.41 s, 0.49 against 0.46 s).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import LevelError
from .base import AtomResult, Capabilities, Method, PointResult, StatePlan, Target, is_symmetric

KINDS = ("MP2", "CCSD", "CCSD(T)")
#: prefix -> the Hartree-Fock method name of the reference
PREFIXES = {"": "HF", "R": "RHF", "U": "UHF"}
CC_CONV_TOL = 1e-9
CC_CONV_TOL_NORMT = 1e-7
#: a grid point's convergence: PySCF's own defaults (energy, amplitudes)
CC_GRID_CONV_TOL = 1e-7
CC_GRID_CONV_TOL_NORMT = 1e-5
CC_MAX_CYCLE = 100
CC_DIIS_SPACE = 12


def split_name(name: str) -> tuple[str, str]:
    """(reference method name, kind) of 'UCCSD(T)' -> ('UHF', 'CCSD(T)')."""
    name = name.upper()
    for kind in sorted(KINDS, key=len, reverse=True):
        if name.endswith(kind):
            prefix = name[: -len(kind)]
            if prefix in PREFIXES:
                return PREFIXES[prefix], kind
            if prefix == "RO":
                raise LevelError(f"{name} is not offered: PySCF's correlated methods on an ROHF reference are not"
                                 f" semicanonicalised (its (T) would be meaningless); use {kind} or U{kind}")
    raise LevelError(f"unknown correlated method {name!r}")


def frozen_orbitals(atoms, charge: int = 0) -> int:
    """Core orbitals left out of the correlation: the atoms' noble-gas cores (a filled (n-1)d shell from
    Ga on), never more than the electrons fill."""
    from ..analysis.character import core_orbitals
    from ..species import atomic_number

    z = [atomic_number(a) for a in atoms]
    n = sum(core_orbitals(x) for x in z)
    return max(0, min(n, (sum(z) - charge) // 2))


class Correlated(Method):
    """MP2, CCSD and CCSD(T) on a Hartree-Fock reference (see the module docstring)."""

    names = tuple(p + k for k in KINDS for p in ("", "R", "U"))
    capabilities = Capabilities(stability=False, orbitals=True, spin_square=True,
                                components=("reference", "correlation"))
    #: levels of this family may be basis-set extrapolations, CBS(X,Y) (lcao.scan.cbs)
    extrapolates = True

    def accepts(self, name: str) -> bool:
        return name.upper().startswith("RO") and name.upper()[2:] in KINDS

    def check_name(self, name: str) -> None:
        split_name(name)

    def frozen_core_default(self, name: str) -> bool | None:
        return True

    def _hf(self):
        from . import method_named

        return method_named("HF")

    def reference_level(self, level):
        """The Hartree-Fock level whose solutions this level correlates (same basis and d shells; the
        larger basis of an extrapolation)."""
        from dataclasses import replace

        ref, _ = split_name(level.method)
        basis = level.cbs[1] if level.cbs is not None else level.basis
        return replace(level, method=ref, basis=basis, frozen_core=None)

    def kind(self, level) -> str:
        return split_name(level.method)[1]

    def _ref_target(self, target: Target) -> Target:
        return Target(target.atoms, target.charge, target.multiplicity, self.reference_level(target.level))

    def state_plan(self, level, multiplicity: int) -> StatePlan:
        plan = self._hf().state_plan(self.reference_level(level), multiplicity)
        kind = self.kind(level)
        names = {b: ("R" if r == "RHF" else "U") + kind for b, r in plan.reference.items()}
        return StatePlan(plan.primary, names, plan.instability_check, plan.secondary)

    def fixed_multiplicity(self, level, species) -> int | None:
        return self._hf().fixed_multiplicity(self.reference_level(level), species)

    def check(self, level, species, multiplicity) -> None:
        split_name(level.method)
        try:
            self._hf().check(self.reference_level(level), species, multiplicity)
        except LevelError:
            mult = species.lowest_multiplicity() if multiplicity is None else multiplicity
            kind = self.kind(level)
            raise LevelError(f"{level.method} needs a closed-shell singlet (an RHF reference), but multiplicity is"
                             f" {mult}; use {kind} or U{kind} (a UHF reference) for open shells") from None

    # points ---------------------------------------------------------------------------------------

    def _components(self, target: Target):
        """The two component targets and cardinal numbers of an extrapolated level (CBS(X,Y))."""
        small, large, x, y = target.level.cbs
        return (Target(target.atoms, target.charge, target.multiplicity, target.level.with_basis(small)),
                Target(target.atoms, target.charge, target.multiplicity, target.level.with_basis(large)), x, y)

    def point(self, target, r_bohr, branch, start, check_instability=False) -> PointResult:
        if target.level.cbs is not None:
            from dataclasses import replace

            from ..scan.cbs import combine_components

            tx, ty, x, y = self._components(target)
            py = self.point(ty, r_bohr, branch, start, check_instability)
            px = self.point(tx, r_bohr, branch, None, check_instability)
            if not (px.converged and py.converged):
                return replace(py, energy=float("nan"), converged=False, reason=px.reason or py.reason)
            comp = combine_components(px.components, py.components, x, y)
            return replace(py, energy=comp["reference"] + comp["correlation"], components=comp, cycles=px.cycles + py.cycles)
        ref = self._hf().point(self._ref_target(target), r_bohr, branch, start, check_instability)
        return self.on_reference(target, ref, branch)

    def on_reference(self, target: Target, ref: PointResult, branch: str, fine: bool = True) -> PointResult:
        """This method's energy on a converged reference point (the reference's warm start and
        orbitals); a reference that did not converge gives a flagged point. Coupled cluster is converged
        tightly where ``fine``, to PySCF's defaults on a grid point (see the module docstring)."""
        from dataclasses import replace

        if not ref.converged:
            return replace(ref, energy=float("nan"), components={"reference": ref.energy})
        hf = self._hf()
        rt = self._ref_target(target)
        mol = hf._molecule(rt, ref.r_bohr, is_symmetric(branch))  # a symmetry-adapted reference stays so
        mf = _reference_scf(mol, hf._reference(rt, branch), ref)
        if not mf.converged:
            return replace(ref, energy=float("nan"), converged=False, reason="the reference did not re-converge tightly",
                           components={"reference": ref.energy})
        ecorr, ok, cycles = _correlate(mf, self.kind(target.level), self._frozen(target, target.atoms, target.charge),
                                       fine)
        reason = None if ok else f"{self.kind(target.level)} iterations did not converge"
        return replace(ref, energy=float(mf.e_tot + ecorr), converged=ok, cycles=ref.cycles + cycles,
                       reason=ref.reason or reason, components={"reference": float(mf.e_tot), "correlation": float(ecorr)})

    def _frozen(self, target, atoms, charge) -> int:
        return frozen_orbitals(atoms, charge) if target.level.frozen_core is not False else 0

    def atom(self, symbol, charge, spin, level) -> AtomResult:
        from dataclasses import replace

        from .molecule import build_atom

        from ..species import atomic_number

        if level.cbs is not None:
            from ..scan.cbs import combine_atom

            small, large, x, y = level.cbs
            return combine_atom(self.atom(symbol, charge, spin, level.with_basis(small)),
                                self.atom(symbol, charge, spin, level.with_basis(large)), x, y)
        rl = self.reference_level(level)
        a = self._hf().atom(symbol, charge, spin, rl)
        if not a.converged or atomic_number(symbol) == charge:  # no SCF, or a bare nucleus
            return a
        mol = build_atom(symbol, rl, charge, spin)
        mf = _reference_scf(mol, "UHF", PointResult(0.0, a.energy_hartree, True, 0, warm=a.warm))
        if not mf.converged:
            return replace(a, converged=False)
        frozen = frozen_orbitals((symbol,), charge) if level.frozen_core is not False else 0
        ecorr, ok, _ = _correlate(mf, self.kind(level), frozen)
        return replace(a, energy_hartree=float(mf.e_tot + ecorr), converged=ok,
                       components={"reference": float(mf.e_tot), "correlation": float(ecorr)})

    def fragment_start(self, target, a, b, flip):
        return self._hf().fragment_start(self._ref_target(target), a, b, flip)

    def ghost_atom(self, atom, level, partner, r_bohr, first):
        """The Hartree-Fock atom in the dimer basis, then its correlation (the atom's own cores frozen)."""
        from dataclasses import replace

        from ..species import atomic_number
        from .molecule import build_with_ghost

        if level.cbs is not None:
            from ..scan.cbs import combine_atom

            small, large, x, y = level.cbs
            return combine_atom(self.ghost_atom(atom, level.with_basis(small), partner, r_bohr, first),
                                self.ghost_atom(atom, level.with_basis(large), partner, r_bohr, first), x, y)
        rl = self.reference_level(level)
        own = self._hf().atom(atom.symbol, atom.charge, atom.spin, rl)
        ref = self._hf().ghost_atom(own, rl, partner, r_bohr, first)
        if atomic_number(atom.symbol) == atom.charge or not ref.converged:
            return ref
        symbols = (atom.symbol, partner) if first else (partner, atom.symbol)
        mol = build_with_ghost(symbols, r_bohr, rl, atom.charge, atom.spin, 0 if first else 1)
        mf = _reference_scf(mol, "UHF", PointResult(r_bohr, ref.energy_hartree, True, 0, warm=ref.warm))
        frozen = frozen_orbitals((atom.symbol,), atom.charge) if level.frozen_core is not False else 0
        ecorr, ok, _ = _correlate(mf, self.kind(level), frozen)
        return replace(ref, energy_hartree=float(mf.e_tot + ecorr), converged=ok and bool(mf.converged),
                       components={"reference": float(mf.e_tot), "correlation": float(ecorr)})

    def instability_start(self, target, point, branch):
        return self._hf().instability_start(self._ref_target(target), point, branch)

    def analyse(self, target, point, branch):
        """The reference's orbitals (Hartree-Fock canonical orbitals), analysed as for HF."""
        return self._hf().analyse(self._ref_target(target), point, branch)

    def atom_levels(self, atom, level) -> tuple:
        return self._hf().atom_levels(atom, self.reference_level(level))

    def basis_size(self, target) -> int:
        if target.level.cbs is not None:
            return self.basis_size(self._components(target)[1])
        return self._hf().basis_size(self._ref_target(target))

    def seconds_per_point(self, basis_size: int) -> float:
        # measured, one thread, N2: CCSD(T)/cc-pVDZ (28 functions) about 0.5 s a point, cc-pVTZ (60)
        # 2.7 s, cc-pVQZ (110) 22 s; MP2 a tenth of that
        return 0.5 * (max(basis_size, 1) / 28.0) ** 4

    def orbitals_note(self, level) -> str:
        return "orbitals of the Hartree-Fock reference (canonical), not natural orbitals of the correlated method"

    def describe(self, level) -> dict:
        kind = self.kind(level)
        ref, _ = split_name(level.method)
        return {
            "method": kind,
            "reference": {"HF": "RHF for closed-shell singlets (UHF past the RHF -> UHF instability, where lower),"
                                " UHF otherwise", "RHF": "RHF", "UHF": "UHF"}[ref],
            "correlated_electrons": level.electrons_text + (" (the atoms' noble-gas cores, and a filled (n-1)d shell"
                                                             " from Ga on, are not correlated)" if level.frozen_core else ""),
            "convergence": ({"fitted_points_and_atoms": {"energy_hartree": CC_CONV_TOL,
                                                         "amplitudes": CC_CONV_TOL_NORMT},
                             "grid_points": {"energy_hartree": CC_GRID_CONV_TOL, "amplitudes": CC_GRID_CONV_TOL_NORMT}}
                            if kind != "MP2" else None),
            "orbitals": self.orbitals_note(level),
        } | ({"extrapolation": {"bases": list(level.cbs[:2]), "cardinal_numbers": list(level.cbs[2:]),
                                "correlation": "inverse cube in the cardinal number (Helgaker, Klopper, Koch & Noga,"
                                               " J. Chem. Phys. 106, 9639 (1997))",
                                "hartree_fock": f"from {level.cbs[1]} (the larger basis), not extrapolated"}}
             if level.cbs is not None else {})

    def caution(self, level) -> str:
        kind = self.kind(level)
        typical = {
            "MP2": "MP2 overbinds multiple bonds and can be far off for open shells and stretched bonds;",
            "CCSD": "CCSD misses the triples, typically some tenths of an eV of D_e for multiple bonds;",
            "CCSD(T)": ("CCSD(T) near the basis-set limit gives D_e of single-reference molecules within about 0.05 eV"
                        " (published benchmarks such as HEAT and W4), but a finite basis loses much more, and stretched"
                        " or multireference bonds (C2, the dissociating limit of multiple bonds) fail;"),
        }[kind]
        return (f"{typical} the correlated curve is single-reference: beyond the restricted solution's instability"
                " it rests on a spin-contaminated reference. Results that feed a process, kinetics or safety model need"
                " validated data (evaluated tables) and the judgement of licensed practice.")


#: the reference is converged this far before it is correlated: the correlation energy is not variational,
#: so an orbital error enters it to first order (with the curve protocol's SCF tolerance, 1e-9 Eh in the
#: energy and about 3e-5 in the orbital gradient, CCSD(T) energies scattered by about 1e-6 Eh, enough to
#: turn omega_e x_e of a fit over 0.01 A steps into nonsense)
REFERENCE_CONV_TOL = 1e-12
REFERENCE_CONV_TOL_GRAD = 1e-8
#: where the orbital gradient stalls above REFERENCE_CONV_TOL_GRAD with the energy settled (a soft orbital
#: rotation just past an instability, or a higher restricted solution: N2 in cc-pVDZ at 1.17 and 1.47 A
#: stalled at 7e-8 to 9e-7), a gradient under this is accepted: CCSD(T) on those stalled references
#: agreed within 3e-8 Eh
REFERENCE_ACCEPT_GRAD = 1e-6


def _reference_scf(mol, reference: str, point: PointResult):
    """The reference point's SCF object, re-converged tightly from its density (a few cycles); ``converged``
    also where the energy settled and the gradient stalled under :data:`REFERENCE_ACCEPT_GRAD`."""
    from .scf import make_scf

    dm = np.asarray(point.warm["dm"])
    if reference == "RHF" and dm.ndim == 3:
        dm = dm.sum(axis=0)
    mf = make_scf(mol, reference)
    mf.conv_tol = REFERENCE_CONV_TOL
    mf.conv_tol_grad = REFERENCE_CONV_TOL_GRAD
    mf.max_cycle = 50
    mf.kernel(dm0=dm)
    if not mf.converged and math.isfinite(mf.e_tot):
        mf.converged = bool(np.linalg.norm(mf.get_grad(mf.mo_coeff, mf.mo_occ)) < REFERENCE_ACCEPT_GRAD)
    return mf


def _correlate(mf, kind: str, frozen: int, fine: bool = True) -> tuple[float, bool, int]:
    """(correlation energy, converged, iterations) of MP2, CCSD or CCSD(T) on a converged SCF object;
    coupled cluster converged tightly where ``fine``, else to PySCF's defaults."""
    from pyscf import cc, mp

    if kind == "MP2":
        pt = mp.MP2(mf, frozen=frozen or None)
        pt.verbose = 0
        pt.kernel()
        return float(pt.e_corr), True, 0
    mycc = cc.CCSD(mf, frozen=frozen or None)
    mycc.verbose = 0
    mycc.conv_tol = CC_CONV_TOL if fine else CC_GRID_CONV_TOL
    mycc.conv_tol_normt = CC_CONV_TOL_NORMT if fine else CC_GRID_CONV_TOL_NORMT
    mycc.max_cycle = CC_MAX_CYCLE
    mycc.diis_space = CC_DIIS_SPACE
    try:
        mycc.kernel()
    except np.linalg.LinAlgError:  # DIIS on diverging amplitudes (a restricted reference of a stretched bond)
        return float("nan"), False, int(mycc.__dict__.get("cycles", 0) or 0)
    ok = bool(mycc.converged) and math.isfinite(mycc.e_corr)
    e = float(mycc.e_corr)
    if kind == "CCSD(T)" and ok:
        e += float(mycc.ccsd_t())
    return e, ok, int(mycc.__dict__.get("cycles", 0) or 0)
