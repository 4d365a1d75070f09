"""Property-based tests (hypothesis) of the parsers, the study loader, unit conversions and the fits."""


import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from lcao.errors import GridError, SpeciesError
from lcao.fit.morse import fit_morse, morse
from lcao.scan.grid import range_grid
from lcao.species import Species, parse_species
from lcao.study import GROUP_KEYS, SETTING_KEYS, TOP_KEYS, StudyError, load_study
from lcao.units import ENERGY_UNITS, angstrom_to_bohr, bohr_to_angstrom, hartree_to, to_hartree

SYMBOLS = ["H", "He", "Li", "Be", "B", "C", "N", "O", "F", "Ne", "Na", "Mg", "Al", "Si", "P", "S", "Cl", "Ar", "K", "Ca"]


@given(st.sampled_from(SYMBOLS), st.sampled_from(SYMBOLS), st.integers(-3, 3))
def test_species_labels_round_trip(a, b, q):
    try:
        sp = Species((a, b), q)
    except SpeciesError:
        return
    back = parse_species(sp.label)
    assert back.atoms == ((a, b) if a != b else (a, a)) and back.charge == q
    assert back.n_electrons == sp.n_electrons


@given(st.text(max_size=12))
def test_species_parser_never_crashes(text):
    try:
        sp = parse_species(text)
    except SpeciesError:
        return
    assert len(sp.atoms) == 2 and sp.n_electrons >= 1


@given(st.floats(0.25, 10.0), st.floats(0.01, 15.0), st.integers(2, 300))
def test_range_grids(lo, span, n):
    hi = lo + span
    assume(hi <= 30.0)
    g = range_grid(lo, hi, n)
    r = g.r_angstrom
    assert len(r) == n and all(b > a for a, b in zip(r, r[1:]))
    assert r[0] == pytest.approx(lo) and r[-1] == pytest.approx(hi)


@given(st.one_of(st.text(max_size=6), st.floats(allow_nan=True), st.none()))
def test_grid_parser_refuses_junk_cleanly(value):
    try:
        range_grid(value, 3.0, 10)
    except GridError:
        return
    assert 0.25 <= float(value) < 3.0


ALLOWED = set(TOP_KEYS) | set(GROUP_KEYS) | set(SETTING_KEYS)


@settings(suppress_health_check=[HealthCheck.function_scoped_fixture], max_examples=40)
@given(st.from_regex(r"[a-z][a-z_]{2,12}", fullmatch=True), st.sampled_from(["top", "defaults", "group"]))
def test_study_loader_names_unknown_keys(tmp_path, key, where):
    assume(key not in ALLOWED)
    body = {"top": f'{key} = 1\n[[group]]\nname = "g"\nspecies = ["N2"]\n',
            "defaults": f'[defaults]\n{key} = 1\n[[group]]\nname = "g"\nspecies = ["N2"]\n',
            "group": f'[[group]]\nname = "g"\nspecies = ["N2"]\n{key} = 1\n'}[where]
    f = tmp_path / "s.toml"
    f.write_text(body)
    with pytest.raises(StudyError) as err:
        load_study(f)
    assert repr(key) in str(err.value) and "allowed" in str(err.value)


@given(st.floats(-1e6, 1e6, allow_nan=False), st.sampled_from(sorted(ENERGY_UNITS)))
def test_energy_units_round_trip(x, unit):
    assert to_hartree(hartree_to(x, unit), unit) == pytest.approx(x, rel=1e-12, abs=1e-300)


@given(st.floats(1e-3, 1e3))
def test_length_units_round_trip(x):
    assert bohr_to_angstrom(angstrom_to_bohr(x)) == pytest.approx(x, rel=1e-12)


@settings(max_examples=30, deadline=None)
@given(st.floats(0.05, 0.5), st.floats(0.6, 2.0), st.floats(1.0, 3.0), st.floats(-200.0, -1.0))
def test_random_morse_parameters_are_recovered(de, a, re_, e0):
    r = np.linspace(0.75 * re_, re_ + 4.0 / a, 40)
    fit = fit_morse(r, morse(r, e0, de, a, re_))
    assert fit.de == pytest.approx(de, rel=1e-6)
    assert fit.a == pytest.approx(a, rel=1e-6)
    assert fit.re == pytest.approx(re_, rel=1e-6)
    assert fit.e_min == pytest.approx(e0, rel=1e-9)
