"""Species parsing, electron counts and spin rules (common practice of chemical notation)."""

import pytest

from lcao.errors import SpeciesError
from lcao.species import hund_unpaired, parse_species


@pytest.mark.parametrize(
    "text,atoms,charge",
    [
        ("N2", ("N", "N"), 0),
        ("CO", ("C", "O"), 0),
        ("HCl", ("H", "Cl"), 0),
        ("LiH", ("Li", "H"), 0),
        ("NO+", ("N", "O"), 1),
        ("CN-", ("C", "N"), -1),
        ("C2^2-", ("C", "C"), -2),
        ("C22-", ("C", "C"), -2),
        ("O2+", ("O", "O"), 1),
        ("NO^2+", ("N", "O"), 2),
        ("NO++", ("N", "O"), 2),
        ("Cl2", ("Cl", "Cl"), 0),
        (" BF ", ("B", "F"), 0),
    ],
)
def test_accepted_spellings(text, atoms, charge):
    sp = parse_species(text)
    assert sp.atoms == atoms and sp.charge == charge


def test_labels_round_trip():
    for text in ("N2", "NO+", "CN-", "C2^2-", "NO^2+", "HCl"):
        assert parse_species(parse_species(text).label).label == parse_species(text).label
    assert parse_species("C22-").label == "C2^2-"


def test_electron_counts():
    # 14-electron isoelectronic series (common practice)
    for text in ("N2", "CO", "CN-", "NO+", "BF", "C2^2-"):
        assert parse_species(text).n_electrons == 14
    assert parse_species("O2").n_electrons == 16


def test_charge_option_and_agreement():
    assert parse_species("NO", charge=1).charge == 1
    assert parse_species("NO+", charge=1).charge == 1
    with pytest.raises(SpeciesError, match=r"\+1.*-1"):
        parse_species("NO+", charge=-1)


@pytest.mark.parametrize(
    "text,fragment",
    [
        ("Xx2", "Xx"),
        ("N", "one atom"),
        ("CO2", "not a diatomic"),
        ("NO2+", "NO^2+"),
        ("H3", "3 atoms"),
        ("N2*", "'*'"),
        ("", "formula"),
    ],
)
def test_bad_formulas_name_the_problem(text, fragment):
    with pytest.raises(SpeciesError) as err:
        parse_species(text)
    assert fragment in str(err.value)


def test_charge_leaving_no_electrons():
    with pytest.raises(SpeciesError, match="leaves 0 electrons"):
        parse_species("H2", charge=2)
    with pytest.raises(SpeciesError, match="below -4"):
        parse_species("N2", charge=-5)


def test_multiplicity_rules():
    o2 = parse_species("O2")
    assert o2.check_multiplicity(3) == 3
    with pytest.raises(SpeciesError, match="16 electrons"):
        o2.check_multiplicity(2)
    with pytest.raises(SpeciesError, match="2 electrons"):
        parse_species("H2").check_multiplicity(5)
    # candidates up to the atoms' unpaired electrons (common practice: Hund's rule)
    assert o2.multiplicity_candidates() == (1, 3, 5)
    assert parse_species("NO").multiplicity_candidates() == (2, 4, 6)
    assert parse_species("H2").multiplicity_candidates() == (1, 3)


def test_hund_unpaired_ground_states():
    # ground terms of the atoms (NIST Atomic Spectra Database, common practice):
    # H 2S, C 3P, N 4S, O 3P, F 2P, Ne 1S, Cr 7S, Fe 5D
    assert [hund_unpaired(z) for z in (1, 6, 7, 8, 9, 10, 24, 26)] == [1, 2, 3, 2, 1, 0, 6, 4]
