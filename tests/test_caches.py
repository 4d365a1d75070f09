"""The per-process caches: what they return equals a fresh PySCF computation, and their bounds hold."""

import numpy as np
import pytest
from pyscf import gto

from lcao.levels import parse_level
from lcao.scan.scf import INTEGRALS, BoundedCache, IntegralCache, build_molecule, kept_basis_files, make_scf


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
    assert np.max(np.abs(INTEGRALS.get(mol) - ref.intor("int2e", aosym="s8"))) < 1e-12
    assert mol.nelectron == ref.nelectron and mol.energy_nuc() == pytest.approx(ref.energy_nuc(), abs=1e-12)


def test_scf_with_cached_integrals_equals_plain_pyscf():
    from pyscf import scf

    level = parse_level("HF/6-31G")
    mol = build_molecule(("N", "N"), 2.1, level, 0, 0)
    mf = make_scf(mol, "RHF")
    mf.kernel()
    ref = scf.RHF(gto.M(atom="N 0 0 0; N 0 0 2.1", unit="Bohr", basis="6-31G", verbose=0)).run()
    assert mf.e_tot == pytest.approx(ref.e_tot, abs=1e-8)


def test_large_integral_sets_are_not_kept():
    level = parse_level("HF/6-31G")
    mol = build_molecule(("N", "N"), 2.1, level, 0, 0)
    size = INTEGRALS.get(mol).nbytes
    small = IntegralCache(32 * size - 1)  # one set is just over 1/32 of the bound
    small.get(mol)
    assert len(small._eri) == 0
    roomy = IntegralCache(32 * size)
    assert roomy.get(mol) is roomy.get(mol)  # kept and reused


@pytest.mark.parametrize("reference,spin", [("RHF", 0), ("UHF", 2)])
def test_default_guess_with_kept_basis_files_equals_pyscf(reference, spin):
    # the reference is PySCF's own default (minao) guess outside the block
    from pyscf.gto import basis as gb

    mol = build_molecule(("C", "O"), 2.2, parse_level("HF/6-31G"), 0, spin)
    ref = np.asarray(make_scf(mol, reference).get_init_guess(mol, "minao"))
    original = gb.load
    with kept_basis_files():
        assert gb.load is not original
        first = np.asarray(make_scf(mol, reference).get_init_guess(mol, "minao"))
        again = np.asarray(make_scf(mol, reference).get_init_guess(mol, "minao"))  # from the kept sets
    assert gb.load is original
    assert np.array_equal(first, ref) and np.array_equal(again, ref)


@pytest.mark.parametrize("basis", ["STO-3G", "6-31G"])
def test_matrix_product_jk_equals_pyscf_build(basis):
    # the reference is PySCF's own in-core build (pyscf.scf.hf.dot_eri_dm) on the same integrals
    from pyscf.scf import hf

    from lcao.scan import jk

    mol = build_molecule(("C", "O"), 2.2, parse_level(f"HF/{basis}"), 0, 0)
    eri = INTEGRALS.get(mol)
    n = mol.nao
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

    from lcao.scan import jk, lean

    small = make_scf(build_molecule(("N", "N"), 2.1, parse_level("HF/6-31G"), 0, 0), "UHF")
    large = make_scf(build_molecule(("N", "N"), 2.1, parse_level("HF/cc-pVDZ"), 0, 0), "UHF")
    assert small.mol.nao <= jk.MAX_NAO < large.mol.nao
    for mf in (small, large):  # both lean: same-named subclasses of PySCF's class
        assert type(mf) is not pyscf_scf.uhf.UHF and isinstance(mf, pyscf_scf.uhf.UHF)
        assert type(mf).__name__ == "UHF"
    assert lean.uses_products(small) and not lean.uses_products(large)
    large.get_jk(dm=large.get_init_guess())
    assert "_lcao_jk" not in vars(large)  # PySCF's own build
    # a second-order copy keeps the products, and converges to PySCF's own energy
    mn = small.newton()
    mn.kernel()
    assert "_lcao_jk" in vars(mn)
    ref = pyscf_scf.UHF(gto.M(atom="N 0 0 0; N 0 0 2.1", unit="Bohr", basis="6-31G", verbose=0)).run()
    assert mn.e_tot == pytest.approx(ref.e_tot, abs=1e-8)
    assert small.chkfile is None and large.chkfile is None
    from pyscf.scf import hf

    assert hf.MUTE_CHKFILE is False  # restored after construction


def _plain_scf(mol, reference):
    """PySCF's own class with make_scf's settings and the same integrals: the reference below."""
    from pyscf import scf as pyscf_scf

    from lcao.scan import scf

    mf = {"RHF": pyscf_scf.RHF, "UHF": pyscf_scf.UHF, "ROHF": pyscf_scf.ROHF}[reference](mol)
    mf.chkfile, mf.verbose, mf.conv_tol, mf.conv_check, mf.max_cycle = None, 0, scf.CONV_TOL, False, 80
    mf._eri = INTEGRALS.get(mol)
    return mf


@pytest.mark.parametrize("reference,atoms,spin", [("RHF", ("N", "N"), 0), ("UHF", ("N", "O"), 1),
                                                  ("ROHF", ("N", "O"), 1), ("UHF", ("O", "O"), 2)])
def test_lean_scf_converges_as_pyscf_classes_do(reference, atoms, spin):
    # the reference is PySCF's own class (pyscf.scf.RHF/UHF/ROHF) from the same start: the same
    # number of cycles and energy (J and K by the matrix products of lcao.scan.jk differ from PySCF's
    # build in the last bits); and with PySCF's own eigensolver and DIIS put back on a lean object,
    # the same energy to the last bit (what the lean class changes besides J and K changes no number)
    import types

    from pyscf.scf import diis, hf

    mol = build_molecule(atoms, 2.4, parse_level("HF/6-31G"), 0, spin)
    mine, plain = make_scf(mol, reference), _plain_scf(mol, reference)
    assert type(mine).DIIS is not type(plain).DIIS
    dm0 = plain.get_init_guess()
    mine.kernel(dm0=dm0)
    plain.kernel(dm0=dm0)
    assert mine.converged and plain.converged and mine.cycles == plain.cycles
    assert mine.e_tot == pytest.approx(plain.e_tot, abs=1e-10)
    undone = make_scf(mol, reference)
    undone._eigh = types.MethodType(hf.SCF._eigh, undone)
    undone.DIIS = diis.CDIIS
    undone.kernel(dm0=dm0)
    assert undone.cycles == mine.cycles and undone.e_tot == mine.e_tot
    assert np.array_equal(undone.mo_coeff, mine.mo_coeff)


def test_lean_eigensolver_gives_pyscf_orbitals():
    # the reference is PySCF's SCF._eigh on the same Fock matrix and orthogonaliser (scipy.linalg.eigh,
    # whose LAPACK routine and workspace the lean one calls directly), including the degenerate pi pairs
    from pyscf.scf import hf

    mol = build_molecule(("N", "N"), 2.1, parse_level("HF/6-31G"), 0, 0)
    mine, plain = make_scf(mol, "RHF"), _plain_scf(mol, "RHF")
    s = plain.get_ovlp()
    x = hf.check_linear_dependency(s)
    f = plain.get_fock(dm=plain.get_init_guess())
    e, c = mine._eigh(f, s, x=x)
    e_ref, c_ref = hf.SCF._eigh(plain, f, s, x=x)
    assert np.array_equal(e, e_ref) and np.array_equal(c, c_ref)


def test_lean_diis_error_vector_is_pyscfs_to_the_last_bit():
    # the reference is PySCF's own error vector (pyscf.scf.diis.get_err_vec_orth) on the matrices of a
    # real UHF point, for both spin sets and one, and with an orthogonaliser that dropped functions
    from pyscf.scf import diis, hf

    from lcao.scan import lean

    mol = build_molecule(("O", "O"), 2.4, parse_level("HF/6-31G"), 0, 2)
    mf = _plain_scf(mol, "UHF")
    s = mf.get_ovlp()
    dm = mf.get_init_guess()
    f = mf.get_fock(dm=dm)
    x = hf.check_linear_dependency(s)
    for args in ((s, dm, f, x), (s, dm[0], f[0], x), (s, dm, f, np.asfortranarray(x[:, 2:]))):
        got = lean.commutator_error(*args)
        assert got is not None and np.array_equal(got, diis.get_err_vec_orth(*args))
    assert lean.commutator_error(s, dm, f[0], x) is None  # ROHF's shapes: PySCF computes it


def test_lean_diis_without_pyscfs_product_routine_takes_pyscfs_path(monkeypatch):
    # where a PySCF build has no NPdgemm the error vector is left to PySCF: the same SCF to the last bit
    from lcao.scan import lean

    mol = build_molecule(("N", "O"), 2.2, parse_level("HF/6-31G"), 0, 1)
    with_routine = make_scf(mol, "UHF")
    with_routine.kernel()
    monkeypatch.setattr(lean, "_GEMM", [None])
    without = make_scf(mol, "UHF")
    assert lean.commutator_error(without.get_ovlp(), *[np.zeros((2, 18, 18))] * 2, np.eye(18)) is None
    without.kernel()
    assert without.converged and without.cycles == with_routine.cycles and without.e_tot == with_routine.e_tot


@pytest.mark.parametrize("dependent", [False, True])
def test_lean_diis_step_equals_pyscf_step_to_the_last_bit(dependent):
    # the reference is PySCF's own extrapolation (pyscf.lib.diis.DIIS.extrapolate) on the same vectors;
    # with a repeated error vector its DIIS matrix is singular and PySCF takes a pseudo-inverse on
    # scipy's eigenvectors, which numpy's differ from in the last bits
    from pyscf.lib import diis as lib_diis
    from pyscf.scf import diis

    from lcao.scan import lean

    rng = np.random.default_rng(7)
    xs = rng.normal(size=(5, 40))
    errs = rng.normal(scale=1e-3, size=(5, 40))
    if dependent:
        errs[3] = errs[1]
    mine, plain = lean.lean_diis_class()(), diis.CDIIS()
    for obj in (mine, plain):
        obj.incore = True
        for x, e in zip(xs, errs):
            got = lib_diis.DIIS.update(obj, x, xerr=e)
        obj.result = got
    w = np.linalg.eigvalsh(plain._H[:6, :6])
    assert (np.min(np.abs(w)) < 1e-14) == dependent
    assert np.array_equal(mine.result, plain.result)


def test_curve_on_lean_scf_equals_curve_on_pyscf_classes(monkeypatch):
    # the reference is the same protocol on PySCF's own SCF classes (LEAN_SCF off): restricted and
    # unrestricted sweeps, stability checks and refinement land on the same solutions
    import lcao
    from lcao.pipeline import clear_caches
    from lcao.scan import scf

    def run():
        clear_caches()
        res = lcao.curve("N2", "HF/6-31G", points=16, analyse_points=False)
        return ([p.energy_hartree for p in res.points + res.refined], [p.branch for p in res.points],
                [p.cycles for p in res.points])

    lean_e, lean_b, lean_c = run()
    monkeypatch.setattr(scf, "LEAN_SCF", False)
    plain_e, plain_b, plain_c = run()
    clear_caches()
    assert lean_b == plain_b and lean_c == plain_c
    assert np.max(np.abs(np.array(lean_e) - np.array(plain_e))) < 1e-9


def test_orthogonaliser_equals_pyscf_canonical_orthogonalisation():
    from pyscf.scf import hf

    mol = build_molecule(("N", "O"), 2.2, parse_level("HF/6-31G"), 0, 1)
    x = INTEGRALS.orthogonaliser(mol)
    ref = hf.check_linear_dependency(mol.intor("int1e_ovlp"))
    assert x.shape == ref.shape  # the same functions kept; columns are eigenvectors, signs arbitrary
    assert np.max(np.abs(x @ x.T - ref @ ref.T)) < 1e-9  # X X^T = S^-1 without linear dependence
    s = INTEGRALS.one_electron(mol)[1]
    assert np.max(np.abs(x.T @ s @ x - np.eye(x.shape[1]))) < 1e-10  # X^T S X = 1 (its definition)


def test_prefetched_integrals_equal_fresh_ones():
    # computed over two processes where a fork is possible, here otherwise; the reference is PySCF
    cache = IntegralCache(160 * 2**20)
    level = parse_level("HF/STO-3G")
    mols = [build_molecule(("B", "F"), r, level, 0, 0) for r in (2.0, 2.4, 2.8, 3.2)]
    cache.prefetch(mols, 2)
    for mol in mols:
        ref = gto.M(atom=f"B 0 0 0; F 0 0 {mol.atom_coord(1)[2]}", unit="Bohr", basis="STO-3G", verbose=0)
        assert np.max(np.abs(cache.get(mol) - ref.intor("int2e", aosym="s8"))) < 1e-12
        h, s = cache.one_electron(mol)
        assert np.max(np.abs(s - ref.intor("int1e_ovlp"))) < 1e-12
        assert np.max(np.abs(h - ref.intor("int1e_kin") - ref.intor("int1e_nuc"))) < 1e-12
