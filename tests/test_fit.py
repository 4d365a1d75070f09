"""Curve fitting: synthetic data with known answers, analytic levels, an independent Hessian."""

import warnings

import numpy as np
import pytest

import lcao
from lcao.errors import FitError
from lcao.export.fit_fields import fit_document
from lcao.fit.local import dunham_constants, local_fit
from lcao.fit.morse import fit_morse, morse, morse_jacobian, morse_levels
from lcao.fit.vibration import solve_levels
from lcao.masses import resolve_isotopes
from lcao.scan.grid import range_grid
from lcao.units import HARTREE_CM1, angstrom_to_bohr, bohr_to_angstrom

MU_CO = resolve_isotopes(("C", "O")).reduced_mass_me


def test_morse_recovered_from_exact_data():
    # synthetic data with known parameters (atomic units)
    true = (-112.7, 0.35, 1.15, 2.13)
    r = np.linspace(1.6, 5.0, 40)
    fit = fit_morse(r, morse(r, *true))
    for got, want in zip((fit.e_min, fit.de, fit.a, fit.re), true):
        assert got == pytest.approx(want, rel=1e-6)


def test_morse_jacobian_equals_central_differences():
    # analytic: the derivatives of V(r) = e_min + de (1 - exp(-a (r - re)))^2 against central
    # differences of the function itself
    p = np.array([-112.7, 0.35, 1.15, 2.13])
    r = np.linspace(1.2, 6.0, 25)
    jac = morse_jacobian(r, *p)
    for k in range(4):
        h = np.zeros(4)
        h[k] = 1e-6 * max(1.0, abs(p[k]))
        numeric = (morse(r, *(p + h)) - morse(r, *(p - h))) / (2 * h[k])
        assert np.max(np.abs(jac[:, k] - numeric)) < 1e-7


def test_morse_fit_stays_inside_its_bounds():
    # data without a well (flat, with noise): the unconstrained least-squares optimum has a steeper
    # exponent than the bound of 50 per bohr, so the fit falls back to the bounded method
    rng = np.random.default_rng(3)
    r = np.linspace(1.5, 4.0, 12)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = fit_morse(r, -1.0 + rng.normal(0, 1e-6, r.size))
    assert 1e-4 <= fit.a <= 50.0 and fit.de >= 1e-8 and 0.5 * r.min() <= fit.re <= 2.0 * r.max()


def test_morse_standard_errors_have_the_right_size():
    # noise of known size: the spread of the parameters over many noisy fits must
    # match the standard errors the covariance reports (within a factor 1.5)
    rng = np.random.default_rng(20261201)
    true = (-1.0, 0.17, 1.0, 1.4)
    r = np.linspace(0.9, 4.0, 30)
    sigma = 2e-4
    fits = [fit_morse(r, morse(r, *true) + rng.normal(0, sigma, r.size)) for _ in range(60)]
    spread_re = np.std([f.re for f in fits])
    spread_a = np.std([f.a for f in fits])
    mean_err_re = np.mean([f.re_err for f in fits])
    mean_err_a = np.mean([f.a_err for f in fits])
    assert 1 / 1.5 < mean_err_re / spread_re < 1.5
    assert 1 / 1.5 < mean_err_a / spread_a < 1.5
    assert np.mean([f.rms for f in fits]) == pytest.approx(sigma, rel=0.2)


def test_morse_warns_when_the_minimum_is_at_the_edge():
    r = np.linspace(2.2, 4.0, 12)
    with pytest.warns(UserWarning, match="edge"):
        fit_morse(r, morse(r, -1.0, 0.2, 1.0, 2.2))


def morse_co():
    """A CO-like Morse potential from the Huber & Herzberg (1979) constants
    omega_e = 2169.8 and omega_e x_e = 13.29 cm-1 (r_e 1.1283 A)."""
    we = 2169.8 / HARTREE_CM1
    wexe = 13.29 / HARTREE_CM1
    de = we**2 / (4 * wexe)
    a = np.sqrt(2 * MU_CO * wexe)
    re_ = float(angstrom_to_bohr(1.1283))
    return we, wexe, de, a, re_


def test_dvr_levels_match_analytic_morse_levels():
    # Morse (1929): G(v) = we (v+1/2) - wexe (v+1/2)^2, lowest 10 levels within 0.01 cm-1
    we, wexe, de, a, re_ = morse_co()
    lv = solve_levels(lambda r: morse(r, 0.0, de, a, re_), MU_CO, 1.2, 6.0, 0.5 * de, 0.0)
    exact = morse_levels(we, wexe, 9) * HARTREE_CM1
    got = np.array(lv.energies[:10]) * HARTREE_CM1
    assert np.max(np.abs(got - exact)) < 0.01


def test_dunham_relations_on_a_morse_potential():
    # For a Morse potential the Dunham relations give wexe = a^2/(2 mu) and
    # alpha_e = 6 B^2/we (a re - 1) exactly (Dunham 1932; Herzberg 1950)
    we, wexe, de, a, re_ = morse_co()
    k, c3, c4 = 2 * de * a**2, -de * a**3, 7.0 / 12.0 * de * a**4
    c = dunham_constants(re_, k, c3, c4, MU_CO)
    assert c["we"] == pytest.approx(we, rel=1e-12)
    assert c["wexe"] == pytest.approx(wexe, rel=1e-12)
    assert c["alpha_e"] == pytest.approx(6 * c["be"] ** 2 / we * (a * re_ - 1), rel=1e-12)
    # B_e of CO from h/(8 pi^2 c mu r_e^2): 1.9313 cm-1 (Huber & Herzberg 1979)
    assert c["be"] * HARTREE_CM1 == pytest.approx(1.9313, abs=2e-3)


def test_local_fit_needs_an_interior_minimum():
    r = np.linspace(2.5, 4.0, 8)
    with pytest.raises(FitError, match="misses the minimum"):
        local_fit(r, morse(r, -1.0, 0.2, 1.0, 2.0))
    with pytest.raises(FitError, match="at least 5"):
        local_fit(r[:4], morse(r[:4], -1.0, 0.2, 1.0, 2.9))


def hessian_wavenumber(species, re_bohr, iso):
    """Harmonic wavenumber from PySCF's analytic RHF Hessian at r_e: k = d2E/dz_B^2."""
    from pyscf.hessian import rhf as rhf_hess

    from lcao.levels import parse_level
    from lcao.methods.molecule import build_molecule
    from lcao.methods.scf import solve

    sp = lcao.parse_species(species)
    sol = solve(build_molecule(sp.atoms, re_bohr, parse_level("HF/6-31G"), 0, 0), "RHF", follow_stability=False)
    h = rhf_hess.Hessian(sol.scf).kernel()
    k = h[1, 1, 2, 2]
    return np.sqrt(k / iso.reduced_mass_me) * HARTREE_CM1


@pytest.mark.parametrize("species,centre", [("N2", 1.089), ("CO", 1.131)])
def test_harmonic_wavenumber_matches_analytic_hessian(species, centre):
    res = lcao.curve(species, "HF/6-31G", range_grid(centre - 0.08, centre + 0.08, 17), multiplicity=1)
    fit = res.fit
    assert fit is not None
    we_hess = hessian_wavenumber(species, fit.local.re, fit.isotopes)
    assert fit_document(fit)["we_cm1"] == pytest.approx(we_hess, rel=0.005)


def test_f2_unbound_at_631g_weakly_bound_at_sto3g():
    # What Hartree-Fock gives (checked here, not a handbook value): F2 at HF/6-31G
    # lies about 2 eV above two UHF fluorine atoms; at HF/STO-3G it is weakly bound.
    res = lcao.curve("F2", "HF/6-31G", range_grid(1.1, 4.0, 24), multiplicity=1)
    d = fit_document(res.fit)
    assert d["bound"] is False and d["binding"] == "not bound at this level"
    assert 1.5 < d["minimum_above_limit_ev"] < 2.5
    assert d["morse"] is None and d["de_ev"] is None
    sto = lcao.curve("F2", "HF/STO-3G", range_grid(1.0, 4.0, 24), multiplicity=1)
    ds = fit_document(sto.fit)
    assert ds["bound"] is True and 0 < ds["de_ev"] < 1.5


def test_h2_morse_window_ends_at_the_kink():
    # A Morse fit over the whole lowest (kinked) H2 curve differs from one over the
    # window that ends where UHF splits from RHF (measured in issue 4: r_e by ~0.03 A,
    # omega_e by ~600 cm-1); the automatic window must stop at the split.
    res = lcao.curve("H2", "HF/6-31G", range_grid(0.45, 4.0, 40))
    m = fit_document(res.fit)["morse"]
    assert "splits" in m["window_end"]
    a, b = res.scan.instability
    assert m["window_angstrom"][1] <= bohr_to_angstrom(b) + 0.1
    pts = res.trusted_points
    r = np.array([p.r_bohr for p in pts])
    e = np.array([p.energy_hartree for p in pts])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        whole = fit_morse(r, e)
    assert abs(bohr_to_angstrom(whole.re) - m["re_angstrom"]) > 0.01


def test_curve_fit_block_has_the_named_fields():
    res = lcao.curve("CO", "HF/STO-3G", range_grid(0.9, 3.5, 30), multiplicity=1)
    d = fit_document(res.fit)
    for key in ("re_angstrom", "we_cm1", "wexe_cm1", "be_cm1", "de_ev", "d0_ev"):
        assert isinstance(d[key], float)
    for key in ("de_ev", "a_per_angstrom", "re_angstrom", "window_angstrom"):
        assert key in d["morse"]
    assert d["d0_ev"] < d["de_ev"]
    assert d["vibrational_levels"]["n_bound"] > 5
    # three dissociation energies, never mixed: the Morse one is labelled a model value
    assert "model" in d["morse"]["de_note"]


def test_isotopologue_masses():
    # AME2020 masses (Wang et al. 2021): 12C 12 exactly, 16O 15.99491462, 13C 13.00335484
    co = resolve_isotopes(("C", "O"))
    assert co.masses_dalton[0] == 12.0 and co.masses_dalton[1] == pytest.approx(15.99491462, abs=1e-8)
    c13 = resolve_isotopes(("C", "O"), "13,16")
    assert c13.masses_dalton[0] == pytest.approx(13.00335484, abs=1e-8)
    # harmonic isotope shift: we(13CO)/we(12CO) = sqrt(mu12/mu13) (common practice)
    ratio = np.sqrt(co.reduced_mass_me / c13.reduced_mass_me)
    assert ratio == pytest.approx(0.97772, abs=1e-4)
    d2 = resolve_isotopes(("H", "H"), "2H,2H")
    assert d2.reduced_mass_dalton == pytest.approx(1.00705, abs=1e-4)


def test_the_curve_fit_takes_arrays():
    # synthetic Morse curve with known parameters (analytic): the fit needs no curve object, only arrays
    from lcao.fit import FitInput, fit_curve

    de, a, re_, e0, mu = 0.2, 1.1, 2.1, -100.0, 12000.0
    r = np.linspace(1.5, 6.0, 40)
    e = morse(r, e0, de, a, re_)
    nan = tuple(np.full(len(r), np.nan))
    inp = FitInput(tuple(r), tuple(e), "unrestricted", (), (), tuple(r), tuple(e), nan, nan, tuple(e), False,
                   e0 + de, mu)
    fit = fit_curve(inp)
    assert fit.local.re == pytest.approx(re_, abs=1e-3)
    assert fit.morse.de == pytest.approx(de, rel=1e-6) and fit.morse.a == pytest.approx(a, rel=1e-6)
    assert fit.de == pytest.approx(de, abs=1e-4)  # limit minus the fitted minimum
    we = a * np.sqrt(2 * de / mu)  # Morse (1929): omega_e = a sqrt(2 D_e / mu)
    assert fit.constants["we"] == pytest.approx(we, rel=2e-3)
    # Morse G(0); the levels are solved on a spline through the 40 points, good to a few parts per thousand
    assert fit.levels.zpe == pytest.approx(we / 2 - we**2 / (16 * de), rel=5e-3)
    # a restricted branch that lies 2 mEh above the unrestricted one from 3 bohr on ends the Morse window
    split = tuple(x + (2e-3 if ri >= 3.0 else 0.0) for ri, x in zip(r, e))
    cut = fit_curve(FitInput(*[getattr(inp, f) for f in ("well_r", "well_e", "well_branch", "refined_r", "refined_e",
                                                          "curve_r", "curve_e", "curve_s2")],
                             split, tuple(e), False, e0 + de, mu))
    assert "splits" in cut.morse.window_reason and cut.morse.window[1] < 3.0
