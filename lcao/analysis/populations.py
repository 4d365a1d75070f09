"""Populations and bond orders as pure functions on arrays.

* Mulliken overlap population between atoms A and B (Mulliken, J. Chem. Phys.
  23 (1955) 1833): ``Q_AB = 2 sum_{mu in A, nu in B} P_mu,nu S_mu,nu`` with P the
  total (alpha + beta) density matrix.
* Overlap population of one MO c with occupation n: ``n * 2 sum_{A,B} c_mu c_nu S_mu,nu``;
  per electron (n = 1) it classifies the MO: positive bonding, negative
  antibonding, near zero nonbonding.
* Mayer bond order (Mayer, Chem. Phys. Lett. 97 (1983) 270; open-shell form
  Mayer, Int. J. Quantum Chem. 29 (1986) 73):
  ``B_AB = 2 sum_{mu in A, nu in B} [(P^a S)_mu,nu (P^a S)_nu,mu + (P^b S)_mu,nu (P^b S)_nu,mu]``,
  which for a closed shell (P^a = P^b = P/2) is ``sum (PS)_mu,nu (PS)_nu,mu``.
"""

from __future__ import annotations

import numpy as np


def _blocks(slices):
    (a0, a1), (b0, b1) = slices
    return slice(a0, a1), slice(b0, b1)


def mulliken_overlap_population(dm_total, s, slices) -> float:
    """Mulliken overlap population between the two atoms (electrons)."""
    a, b = _blocks(slices)
    return float(2.0 * np.sum(np.asarray(dm_total)[a, b] * s[a, b]))


def mo_overlap_population(c, s, slices) -> float:
    """Overlap population of one MO per electron (positive = bonding)."""
    return float(mo_overlap_populations(np.asarray(c)[:, None], s, slices)[0])


def mo_overlap_populations(c, s, slices) -> np.ndarray:
    """Overlap populations per electron of the MOs in the columns of ``c``."""
    a, b = _blocks(slices)
    c = np.asarray(c)
    return 2.0 * np.sum(c[a] * (s[a, b] @ c[b]), axis=0)


def mayer_bond_order(dm_alpha, dm_beta, s, slices) -> float:
    """Mayer bond order from spin densities (closed and open shells)."""
    a, b = _blocks(slices)
    total = 0.0
    for d in (dm_alpha, dm_beta):
        ps = np.asarray(d) @ s
        total += np.sum(ps[a, b] * ps[b, a].T)
    return float(2.0 * total)


def mo_composition(c, s, groups: dict[str, np.ndarray]) -> dict[str, float]:
    """Mulliken gross populations of one normalised MO by AO group, in percent (sums to 100).

    Args:
        c: MO coefficients; s: AO overlap; groups: name -> AO index array.
    """
    return mo_compositions(np.asarray(c)[:, None], s, groups)[0]


def mo_compositions(c, s, groups: dict[str, np.ndarray]) -> list[dict[str, float]]:
    """:func:`mo_composition` of each MO in the columns of ``c``."""
    c = np.asarray(c)
    gross = c * (s @ c)
    norm = gross.sum(axis=0)
    names = list(groups)
    by_group = np.array([gross[groups[g]].sum(axis=0) for g in names]) * (100.0 / norm)
    return [dict(zip(names, map(float, col))) for col in by_group.T]


def atom_slices(mol) -> tuple[tuple[int, int], tuple[int, int]]:
    """AO ranges (start, stop) of the two atoms."""
    offs = mol.aoslice_by_atom()
    return (int(offs[0, 2]), int(offs[0, 3])), (int(offs[1, 2]), int(offs[1, 3]))
