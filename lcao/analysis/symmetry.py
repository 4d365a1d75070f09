"""Orbital symmetry labels after the SCF.

Each MO is projected onto the symmetry-adapted basis of a symmetric copy of
the same molecule (PySCF's D_inf_h or C_inf_v adapted AO combinations); the
weights are summed by |lambda| (sigma, pi, delta, phi) and, for homonuclear
species, by g/u. An orbital with less than ``PURE`` of its weight in one kind
is reported as mixed, with its weights, never forced into a label (a
broken-symmetry orbital at long range).
"""

from __future__ import annotations

import re
import warnings
from dataclasses import dataclass

import numpy as np

from ..methods.molecule import overlap

PURE = 0.95
LAMBDA_NAMES = {0: "sigma", 1: "pi", 2: "delta", 3: "phi", 4: "gamma"}


@dataclass(frozen=True)
class SymmetryBasis:
    """Adapted AO combinations of a linear molecule, grouped by (|lambda|, parity)."""

    groups: dict  # (lam, parity) -> (U, (U^T S U)^-1)
    homonuclear: bool


#: D2h and C2v irreps (z the bond axis) -> (|lambda|, parity), used when the
#: basis has Cartesian d shells and PySCF can only adapt to the abelian
#: subgroup. Ag/B1u (A1 in C2v) hold both sigma and the x2-y2 delta
#: component; they are counted as sigma, a documented approximation that
#: touches only high-lying d-type virtuals of s-p diatomics.
_ABELIAN = {
    "Ag": (0, "g"), "B1g": (2, "g"), "B2g": (1, "g"), "B3g": (1, "g"),
    "Au": (2, "u"), "B1u": (0, "u"), "B2u": (1, "u"), "B3u": (1, "u"),
    "A1": (0, None), "A2": (2, None), "B1": (1, None), "B2": (1, None),
}


def _irrep_kind(name: str) -> tuple[int, str | None]:
    if name in _ABELIAN:
        return _ABELIAN[name]
    m = re.match(r"^(A|E)(\d*)([gu]?)", name)
    if not m:
        raise ValueError(f"unexpected irrep name {name!r}")
    lam = 0 if m.group(1) == "A" else int(m.group(2) or 1)
    return lam, (m.group(3) or None)


def symmetry_basis(mol) -> SymmetryBasis:
    """The adapted basis of ``mol`` with the metric of its current overlap matrix.

    The adapted combinations of a linear molecule do not depend on the bond
    distance, so they are built once per (atoms, basis, d shells) from a
    symmetric copy and kept in the process's caches; the projector metric uses this geometry's overlap.
    """
    from ..methods.cache import caches

    key = (mol.atom_symbol(0), mol.atom_symbol(1), str(mol.basis), bool(mol.cart), mol.nao)
    kept = caches().symmetry
    got = kept.get(key)
    if got is None:
        got = _adapted_combinations(mol)
        kept.put(key, got)
    blocks, homo = got
    s = overlap(mol)
    return SymmetryBasis({k: (u, np.linalg.inv(u.T @ s @ u)) for k, u in blocks.items()}, homo)


def _adapted_combinations(mol):
    sym = mol.copy()
    sym.symmetry = True
    sym.verbose = 0
    if mol.cart and max(int(mol.bas_angular(i)) for i in range(mol.nbas)) <= 1:
        sym.cart = False  # s and p shells: Cartesian and spherical functions coincide in PySCF
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sym.build(dump_input=False, parse_arg=False)
    blocks: dict = {}
    for name, u in zip(sym.irrep_name, sym.symm_orb):
        blocks.setdefault(_irrep_kind(name), []).append(u)
    homo = mol.atom_symbol(0) == mol.atom_symbol(1) and sym.topgroup == "Dooh"
    return {k: np.hstack(us) for k, us in blocks.items()}, homo


def symmetry_weights(c, s, basis: SymmetryBasis) -> dict:
    """Weight of one MO in each (|lambda|, parity) group; the weights sum to 1."""
    return symmetry_weights_all(np.asarray(c)[:, None], s, basis)[0]


def symmetry_weights_all(c, s, basis: SymmetryBasis) -> list[dict]:
    """:func:`symmetry_weights` of each MO in the columns of ``c``."""
    sc = s @ np.asarray(c)
    keys = list(basis.groups)
    w = np.array([np.sum(v * (inv @ v), axis=0) for v, inv in ((u.T @ sc, inv) for u, inv in basis.groups.values())])
    w = w / w.sum(axis=0)
    return [dict(zip(keys, map(float, col))) for col in w.T]


def kind_label(weights: dict, homonuclear: bool) -> tuple[str | None, int | None, str | None, dict]:
    """(kind, |lambda|, parity, summary weights) of an MO; kind None when mixed.

    ``kind`` is e.g. 'sigma_g', 'pi_u' (homonuclear) or 'sigma', 'pi'.
    """
    by_lam: dict[int, float] = {}
    by_kind: dict[str, float] = {}
    for (lam, par), w in weights.items():
        by_lam[lam] = by_lam.get(lam, 0.0) + w
        name = LAMBDA_NAMES.get(lam, f"lambda{lam}") + (f"_{par}" if homonuclear and par else "")
        by_kind[name] = by_kind.get(name, 0.0) + w
    best = max(by_kind, key=by_kind.get)
    lam = max(by_lam, key=by_lam.get)
    summary = {k: round(v, 4) for k, v in sorted(by_kind.items(), key=lambda kv: -kv[1]) if v > 1e-3}
    if by_kind[best] < PURE:
        return None, None, None, summary
    par = best.split("_")[1] if "_" in best else None
    return best, lam, par, summary


def off_symmetry_electrons(dm, s, basis: SymmetryBasis) -> float:
    """How far a density breaks the molecule's spatial symmetry: the Frobenius norm of the blocks of the
    total density (alpha plus beta) that couple different (|lambda|, parity) groups, in an orthonormal
    symmetry-adapted basis (electrons; 0 for a symmetric density).

    A solution whose total density is symmetric keeps its spatial symmetry even where each spin density is
    not (the unrestricted dissociation of a closed-shell homonuclear molecule puts the alpha electrons on
    one atom and the beta electrons on the other, each spin density broken, the total symmetric).
    """
    dm = np.asarray(dm, float)
    total = dm.sum(axis=0) if dm.ndim == 3 else dm
    parts = []
    for u, inv in basis.groups.values():
        w, v = np.linalg.eigh(inv)  # (U^T S U)^-1/2: the group's functions made orthonormal
        parts.append(u @ (v * np.sqrt(w)) @ v.T)
    sizes = [p.shape[1] for p in parts]
    v = np.hstack(parts)
    d = v.T @ s @ total @ s @ v
    off = d.copy()
    start = 0
    for k in sizes:
        off[start:start + k, start:start + k] = 0.0
        start += k
    return float(np.linalg.norm(off))
