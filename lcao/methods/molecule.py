"""PySCF molecules of a diatomic (on the z axis, no output) and their integrals.

Calculations run without point-group symmetry: a solution may then break the molecule's symmetry where
that lowers its energy (spin symmetry at a stretched bond, and sometimes spatial symmetry), and Pi
radicals do not converge in the full linear groups (PySCF 2.14); orbitals are labelled afterwards
(:mod:`lcao.analysis.symmetry`). The symmetry-adapted branch of a curve whose lowest solution breaks the
spatial symmetry is computed in the largest abelian subgroup (:data:`POINT_GROUPS`, common practice).
"""

from __future__ import annotations

import warnings

import numpy as np

from .cache import caches


#: the abelian point groups of a symmetry-adapted solution: homonuclear (D_inf_h) and heteronuclear (C_inf_v)
POINT_GROUPS = {True: "D2h", False: "C2v"}


def point_group(symbols) -> str:
    """The abelian subgroup a symmetry-adapted solution of these two atoms is computed in."""
    return POINT_GROUPS[symbols[0] == symbols[1]]


def _build(atoms, basis: str, cartesian: bool, charge: int, spin: int, symmetry: str | bool = False):
    from pyscf import gto

    mol = gto.Mole()
    mol.atom = atoms
    mol.unit = "Bohr"
    mol.basis = basis
    mol.cart = cartesian
    mol.charge = charge
    mol.spin = spin
    mol.symmetry = symmetry
    mol.verbose = 0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mol.build(dump_input=False, parse_arg=False)
    return mol


def build_molecule(symbols, r_bohr: float, level, charge: int, spin: int, symmetric: bool = False):
    """The diatomic with ``symbols[0]`` at the origin and ``symbols[1]`` at z = ``r_bohr``.

    Args:
        symbols: the two element symbols; level: :class:`lcao.levels.Level`.
        charge: net charge; spin: 2S (alpha minus beta electrons).
        symmetric: with the point group of :func:`point_group` (the same functions in the same order).
    """
    key = (tuple(symbols), level.basis, level.cartesian, charge, spin, symmetric)
    templates = caches().templates
    tmpl = templates.get(key)
    if tmpl is None:
        tmpl = _build([(symbols[0], (0.0, 0.0, 0.0)), (symbols[1], (0.0, 0.0, float(r_bohr)))],
                      level.basis, level.cartesian, charge, spin, point_group(symbols) if symmetric else False)
        # fixed once: PySCF otherwise counts the electrons from the nuclear charges in every SCF cycle
        tmpl.nelectron = tmpl.nelectron
        templates.put(key, tmpl)
    coords = np.array([[0.0, 0.0, 0.0], [0.0, 0.0, float(r_bohr)]])
    return tmpl.set_geom_(coords, unit="Bohr", inplace=False)


def build_with_ghost(symbols, r_bohr: float, level, charge: int, spin: int, keep: int):
    """The diatomic's geometry and full basis with only atom ``keep`` (0 or 1) real and the other a ghost
    (its basis functions, no nucleus, no electrons): an atom in the dimer basis (counterpoise)."""
    atoms = [(symbols[0], (0.0, 0.0, 0.0)), (symbols[1], (0.0, 0.0, float(r_bohr)))]
    other = 1 - keep
    atoms[other] = (f"ghost-{symbols[other]}", atoms[other][1])
    return _build(atoms, level.basis, level.cartesian, charge, spin)


def build_atom(symbol: str, level, charge: int, spin: int):
    """A single atom at the origin, no symmetry."""
    return _build([(symbol, (0.0, 0.0, 0.0))], level.basis, level.cartesian, charge, spin)


def distance_of(mol) -> float:
    """The bond distance of a diatomic built here, bohr."""
    return float(mol.atom_coord(1)[2] - mol.atom_coord(0)[2])


def overlap(mol) -> np.ndarray:
    """The AO overlap matrix of ``mol`` (cached, read-only)."""
    return caches().integrals.one_electron(mol)[1]


def ao_labels(mol, fmt=True):
    """``mol.ao_labels(fmt)``, cached per atoms and basis (labels do not depend on the distance)."""
    k = (tuple(mol.elements), repr(mol.basis), bool(mol.cart), fmt)
    labels = caches().labels
    got = labels.get(k)
    if got is None:
        got = mol.ao_labels(fmt=fmt)
        labels.put(k, got)
    return got
