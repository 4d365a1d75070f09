"""Hartree-Fock: restricted (RHF), unrestricted (UHF) and restricted open-shell (ROHF) solutions.

``HF`` means RHF for a closed-shell singlet, followed through the well and checked at every point for
an instability towards UHF (the broken-symmetry unrestricted branch is computed from there on), and
UHF otherwise. ``RHF``, ``UHF`` and ``ROHF`` ask for one reference; RHF reports an instability but
does not follow it. The machinery is shared with Kohn-Sham DFT (:mod:`lcao.methods.scf_method`).
"""

from __future__ import annotations

from .scf_method import SelfConsistentField

#: method name -> reference; 'auto' is RHF for a closed-shell singlet and UHF otherwise
REFERENCES = {"HF": "auto", "RHF": "RHF", "UHF": "UHF", "ROHF": "ROHF"}


class HartreeFock(SelfConsistentField):
    """The Hartree-Fock family (see the module docstring)."""

    names = tuple(REFERENCES)

    def choice(self, level) -> str:
        return REFERENCES[level.method.upper()]

    def seconds_per_point(self, basis_size: int) -> float:
        # measured warm-started points with stability checks, one thread: 0.012 s for N2 in 6-31G
        # (18 functions), 0.39 s in cc-pVTZ (60)
        return 0.012 * (max(basis_size, 1) / 18.0) ** 3

    def caution(self, level) -> str:
        return ("Hartree-Fock energies, and minimal-basis ones above all, are qualitative: dissociation energies at"
                " this level can be badly wrong (often a large fraction too small, or no binding at all). Results"
                " that feed a process, kinetics or safety model need validated data (evaluated tables,"
                " higher-level calculations) and the judgement of licensed practice.")

    def describe(self, level) -> dict:
        return {"method": "Hartree-Fock", "reference": {"auto": "RHF for closed-shell singlets (followed into"
                " broken-symmetry UHF past the instability), UHF otherwise"}.get(self.choice(level), self.choice(level))}
