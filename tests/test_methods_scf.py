"""The SCF machinery of the Hartree-Fock method: what its caches and shortcuts return equals a fresh
PySCF computation (the reference throughout), and their bounds hold."""

import os

import numpy as np
import pytest
from pyscf import gto

from lcao.levels import parse_level
from lcao.methods.cache import BoundedCache, IntegralCache, caches, clear_caches
from lcao.methods.molecule import build_molecule
from lcao.methods.scf import CONV_TOL, make_scf


def test_bounded_cache_evicts_least_recently_used_by_size():
    c = BoundedCache(10, size=len)
    c.put("a", "xxxx")
    c.put("b", "xxxx")
    assert c.get("a") == "xxxx"  # a is now the most recent
    c.put("c", "xxxx")  # 12 > 10: b goes
    assert c.get("b") is None and c.get("a") and c.get("c")
    assert c.total == 8 and len(c) == 2
    c.put("d", None)  # nothing to keep
    assert len(c) == 2


@pytest.mark.parametrize("basis,cart", [("6-31G", False), ("6-31G*", True)])
def test_moved_template_molecule_equals_a_fresh_pyscf_build(basis, cart):
    # the reference is PySCF itself: a molecule built from scratch at the same distance
    level = parse_level(f"HF/{basis}")
    build_molecule(("C", "O"), 2.0, level, 0, 0)  # the template, at another distance
    mol = build_molecule(("C", "O"), 2.3, level, 0, 0)
    ref = gto.M(atom="C 0 0 0; O 0 0 2.3", unit="Bohr", basis=basis, cart=cart, verbose=0)
    for name in ("int1e_ovlp", "int1e_kin", "int1e_nuc"):
        assert np.max(np.abs(mol.intor(name) - ref.intor(name))) < 1e-12, name
    assert np.max(np.abs(caches().integrals.two_electron(mol) - ref.intor("int2e", aosym="s8"))) < 1e-12
    assert mol.nelectron == ref.nelectron and mol.energy_nuc() == pytest.approx(ref.energy_nuc(), abs=1e-12)


def _plain_scf(mol, reference):
    """PySCF's own class with make_scf's settings: the reference below."""
    from pyscf import scf as pyscf_scf

    mf = {"RHF": pyscf_scf.RHF, "UHF": pyscf_scf.UHF, "ROHF": pyscf_scf.ROHF}[reference](mol)
    mf.chkfile, mf.verbose, mf.conv_tol, mf.conv_check, mf.max_cycle = None, 0, CONV_TOL, False, 80
    return mf


@pytest.mark.parametrize("reference,atoms,spin", [("RHF", ("N", "N"), 0), ("UHF", ("N", "O"), 1),
                                                  ("ROHF", ("N", "O"), 1), ("UHF", ("O", "O"), 2)])
def test_scf_objects_converge_as_pyscf_classes_do(reference, atoms, spin):
    # the reference is PySCF's own class from the same start on its own integrals: the same number of
    # cycles and energy (J and K from the matrix products of lcao.methods.jk differ from PySCF's build
    # in the last bits, nothing else differs)
    mol = build_molecule(atoms, 2.4, parse_level("HF/6-31G"), 0, spin)
    mine, plain = make_scf(mol, reference), _plain_scf(mol, reference)
    dm0 = plain.get_init_guess()
    mine.kernel(dm0=dm0)
    plain.kernel(dm0=dm0)
    assert mine.converged and plain.converged and mine.cycles == plain.cycles
    assert mine.e_tot == pytest.approx(plain.e_tot, abs=1e-10)
    assert mine.chkfile is None and type(mine).__name__ == type(plain).__name__


def test_large_integral_sets_are_not_kept():
    level = parse_level("HF/6-31G")
    mol = build_molecule(("N", "N"), 2.1, level, 0, 0)
    size = IntegralCache(160 * 2**20).two_electron(mol).nbytes
    small = IntegralCache(32 * size - 1)  # one set is just over 1/32 of the bound
    small.two_electron(mol)
    assert len(small._eri) == 0
    roomy = IntegralCache(32 * size)
    assert roomy.two_electron(mol) is roomy.two_electron(mol)  # kept and reused


@pytest.mark.parametrize("basis", ["STO-3G", "6-31G"])
def test_matrix_product_jk_equals_pyscf_build(basis):
    # the reference is PySCF's own in-core build (pyscf.scf.hf.dot_eri_dm) on the same integrals
    from pyscf.scf import hf

    from lcao.methods import jk

    mol = build_molecule(("C", "O"), 2.2, parse_level(f"HF/{basis}"), 0, 0)
    eri = caches().integrals.two_electron(mol)
    n = mol.nao
    assert jk.eri_size(eri) == n
    rng = np.random.default_rng(7)
    sym = rng.normal(size=(n, n))
    sym = sym + sym.T
    pair = np.array([sym, rng.normal(size=(n, n)) + np.eye(n)])  # the second not symmetric
    mats = jk.jk_matrices(jk.unpacked(eri, n))
    for dm, hermi in ((sym, 1), (pair, 0)):
        vj, vk = jk.contract(*mats, dm)
        rj, rk = hf.dot_eri_dm(eri, dm, hermi=hermi)
        assert np.max(np.abs(vj - rj)) < 1e-11 and np.max(np.abs(vk - rk)) < 1e-11
    vj, vk = jk.contract(*mats, sym, with_k=False)
    assert vk is None and vj.shape == (n, n)


def test_scf_objects_use_matrix_product_jk_only_for_small_basis_sets():
    from pyscf import scf as pyscf_scf

    from lcao.methods import jk

    small = make_scf(build_molecule(("N", "N"), 2.1, parse_level("HF/6-31G"), 0, 0), "UHF")
    large = make_scf(build_molecule(("N", "N"), 2.1, parse_level("HF/cc-pVDZ"), 0, 0), "UHF")
    assert small.mol.nao <= jk.MAX_NAO < large.mol.nao
    for mf in (small, large):  # same-named subclasses of PySCF's class, overriding get_jk only
        assert isinstance(mf, pyscf_scf.uhf.UHF) and type(mf).__name__ == "UHF"
        assert set(vars(type(mf))) - {"__module__", "__doc__"} == {"get_jk"}
    small.get_jk(dm=small.get_init_guess())
    large.get_jk(dm=large.get_init_guess())
    assert "_lcao_jk" in vars(small) and "_lcao_jk" not in vars(large)  # the latter: PySCF's own build
    # a second-order copy keeps the products, and converges to PySCF's own energy
    mn = small.newton()
    mn.kernel()
    assert "_lcao_jk" in vars(mn)
    ref = pyscf_scf.UHF(gto.M(atom="N 0 0 0; N 0 0 2.1", unit="Bohr", basis="6-31G", verbose=0)).run()
    assert mn.e_tot == pytest.approx(ref.e_tot, abs=1e-8)


def test_kept_orthogonaliser_is_pyscfs():
    # the reference is PySCF's canonical orthogonalisation of the overlap, which an SCF computes first
    from pyscf.scf import hf

    mol = build_molecule(("N", "O"), 2.2, parse_level("HF/6-31G"), 0, 1)
    h, s, x = caches().integrals.one_electron(mol)
    assert np.array_equal(x, hf.check_linear_dependency(np.array(s)))
    assert np.max(np.abs(s - mol.intor("int1e_ovlp"))) < 1e-14
    assert np.max(np.abs(x.T @ s @ x - np.eye(x.shape[1]))) < 1e-10  # X^T S X = 1 (its definition)
    assert make_scf(mol, "UHF").check_linear_dependency(s) is x


def test_integrals_shared_through_a_folder_equal_fresh_ones(tmp_path):
    # one process writes the set it computed, another reads it instead of computing; the reference is
    # PySCF. A set that cannot be read (a torn file) is computed.
    level = parse_level("HF/STO-3G")
    mol = build_molecule(("B", "F"), 2.4, level, 0, 0)
    ref = gto.M(atom="B 0 0 0; F 0 0 2.4", unit="Bohr", basis="STO-3G", verbose=0).intor("int2e", aosym="s8")
    writer, reader = IntegralCache(160 * 2**20), IntegralCache(160 * 2**20)
    writer.share(str(tmp_path))
    reader.share(str(tmp_path))
    writer.two_electron(mol)
    files = os.listdir(tmp_path)
    assert len(files) == 1 and files[0].endswith(".npy")
    assert np.array_equal(reader.two_electron(mol), ref)
    with open(tmp_path / files[0], "wb") as fh:
        fh.write(b"torn")
    fresh = IntegralCache(160 * 2**20)
    fresh.share(str(tmp_path))
    assert np.array_equal(fresh.two_electron(mol), ref)


def test_caches_change_no_number():
    # a curve computed with every cache emptied before each point equals one with the caches
    import lcao
    from lcao.methods import hf

    clear_caches()
    kept = lcao.curve("N2", "HF/STO-3G", points=12, analyse_points=False, workers=1)
    real = hf.HartreeFock.point

    def cold(self, *args, **kwargs):
        clear_caches()
        return real(self, *args, **kwargs)

    hf.HartreeFock.point = cold
    try:
        emptied = lcao.curve("N2", "HF/STO-3G", points=12, analyse_points=False, workers=1)
    finally:
        hf.HartreeFock.point = real
    assert [p.energy_hartree for p in kept.points] == [p.energy_hartree for p in emptied.points]
