"""What one process keeps between calculations: built molecules, integrals, AO labels, symmetry bases.

Every cache lives on one :class:`ProcessCaches` object per process (:func:`caches`), is bounded,
and is emptied by :func:`clear_caches`. Results never depend on them: a cache only saves
recomputing a value that is a pure function of its key (tests compare with and without).
"""

from __future__ import annotations

from collections import OrderedDict

import numpy as np


class BoundedCache:
    """A least-recently-used mapping bounded by the total ``size`` of its values (entries by default)."""

    def __init__(self, limit, size=lambda value: 1):
        self.limit = limit
        self.size = size
        self.total = 0
        self._items: OrderedDict = OrderedDict()

    def get(self, key):
        value = self._items.get(key)
        if value is not None:
            self._items.move_to_end(key)
        return value

    def put(self, key, value) -> None:
        if value is None:
            return
        old = self._items.pop(key, None)
        if old is not None:
            self.total -= self.size(old)
        self._items[key] = value
        self.total += self.size(value)
        while self.total > self.limit and self._items:
            _, dropped = self._items.popitem(last=False)
            self.total -= self.size(dropped)

    def clear(self) -> None:
        self._items.clear()
        self.total = 0

    def keys(self) -> list:
        """The keys held now, least recently used first."""
        return list(self._items)

    def __len__(self) -> int:
        return len(self._items)


def nbytes(value) -> int:
    """Bytes of an array or a tuple of arrays."""
    return sum(np.asarray(a).nbytes for a in value) if isinstance(value, tuple) else np.asarray(value).nbytes


class IntegralCache:
    """One- and two-electron integrals (the latter 8-fold packed) of recent geometries.

    A curve visits most distances several times (restricted and unrestricted branches, sweeps from
    both ends), and the two-electron integrals are most of a warm-started point in a split-valence
    basis (7.8 of about 11 ms for N2 in 6-31G). Keys are the geometry and the basis, not the charge
    or spin. Two-electron sets are bounded in bytes; a curve profits only if about 40 geometries fit,
    so a set above 1/32 of the bound is not kept.
    """

    def __init__(self, limit_bytes: int):
        self.limit_bytes = limit_bytes
        self._eri = BoundedCache(limit_bytes, nbytes)
        self._one = BoundedCache(256)
        #: a folder shared with the other worker processes of a local pool (see :meth:`share`)
        self.shared: str | None = None

    @staticmethod
    def key(mol):
        return (tuple(mol.elements), mol.atom_coords().round(10).tobytes(), bool(mol.cart), repr(mol.basis))

    @staticmethod
    def set_bytes(mol) -> int:
        """Size of ``mol``'s 8-fold packed two-electron set."""
        pairs = mol.nao * (mol.nao + 1) // 2
        return 8 * pairs * (pairs + 1) // 2

    def keeps(self, mol) -> bool:
        """Whether a two-electron set of ``mol``'s size is kept."""
        return self.set_bytes(mol) <= self.limit_bytes / 32

    def two_electron(self, mol) -> np.ndarray:
        k = self.key(mol)
        eri = self._eri.get(k)
        if eri is None:
            eri = self._read_shared(k)
            if eri is None:
                eri = mol.intor("int2e", aosym="s8")
                self._write_shared(k, eri)
            if eri.nbytes <= self.limit_bytes / 32:
                eri.flags.writeable = False
                self._eri.put(k, eri)
        return eri

    def share(self, folder: str | None) -> None:
        """Share two-electron sets with the other processes of a pool through ``folder`` (a fresh
        folder of the pool's own, on a memory file system where there is one): a set one worker computed
        is read by the others (0.1 ms against 7.8 ms to compute one of N2 in 6-31G), so sweeps of one
        curve in different workers compute each geometry once. Each file is written whole under a
        temporary name and renamed; a set that cannot be read is computed. None stops sharing."""
        self.shared = folder

    def _path(self, k) -> str:
        import hashlib
        import os

        return os.path.join(self.shared, hashlib.sha1(repr(k).encode()).hexdigest() + ".npy")

    def _read_shared(self, k):
        if self.shared is None:
            return None
        try:
            return np.load(self._path(k), allow_pickle=False)
        except (OSError, ValueError):
            return None

    def _write_shared(self, k, eri) -> None:
        import os

        if self.shared is None or eri.nbytes > self.limit_bytes / 32:
            return
        path = self._path(k)
        tmp = f"{path}.{os.getpid()}.tmp"
        try:
            with open(tmp, "wb") as fh:
                np.save(fh, eri, allow_pickle=False)
            os.replace(tmp, path)
        except OSError:  # a full or vanished folder: the set is simply not shared
            try:
                os.unlink(tmp)
            except OSError:
                pass

    def one_electron(self, mol):
        """(core Hamiltonian, overlap, orthogonaliser) of the geometry, read-only arrays; the
        orthogonaliser is PySCF's canonical orthogonalisation of the overlap
        (``pyscf.scf.hf.check_linear_dependency``), which every SCF starts with."""
        k = self.key(mol)
        got = self._one.get(k)
        if got is None:
            from pyscf.scf import hf

            h = mol.intor_symmetric("int1e_kin") + mol.intor_symmetric("int1e_nuc")
            s = mol.intor_symmetric("int1e_ovlp")
            x = hf.check_linear_dependency(s)
            for a in (h, s, x):
                a.flags.writeable = False
            got = (h, s, x)
            self._one.put(k, got)
        return got

    def clear(self) -> None:
        self._eri.clear()
        self._one.clear()


class ProcessCaches:
    """The caches of this process (see the module docstring)."""

    def __init__(self):
        #: molecules with their basis parsed, per atoms, basis, d shells, charge and spin: a new
        #: distance only moves the second nucleus (0.02 ms against 0.7 ms for a fresh build)
        self.templates = BoundedCache(64)
        #: 0.1 MB per geometry of N2 in 6-31G, 0.7 MB in cc-pVDZ, 4.7 MB in aug-cc-pVDZ (kept), 13 MB
        #: in cc-pVTZ (not kept)
        self.integrals = IntegralCache(160 * 2**20)
        #: AO labels per atoms and basis (they do not depend on the distance)
        self.labels = BoundedCache(256)
        #: symmetry-adapted bases (lcao.analysis.symmetry), per atoms, basis and distance
        self.symmetry = BoundedCache(256)
        #: density-functional integration grids per geometry (about 1 MB for N2)
        self.grids = BoundedCache(64)

    def clear(self) -> None:
        for c in (self.templates, self.integrals, self.labels, self.symmetry, self.grids):
            c.clear()


_CACHES = ProcessCaches()


def caches() -> ProcessCaches:
    """This process's caches."""
    return _CACHES


def clear_caches() -> None:
    """Empty every cache of this process (benchmarks start each case cold; results never depend on them)."""
    _CACHES.clear()
