"""Level-of-theory parsing and the d-shell convention."""

import pytest

from lcao.errors import LevelError
from lcao.levels import check_basis_covers, parse_level


def test_parse_and_reference_rules():
    from lcao.methods import method_for
    from lcao.species import parse_species

    lv = parse_level("HF/STO-3G")
    assert lv.method == "HF" and lv.basis == "STO-3G"
    hf = method_for(lv)

    def primary(level, mult):
        plan = hf.state_plan(level, mult)
        return plan.reference[plan.primary]

    # 'HF' means RHF for closed-shell singlets, checked and followed into UHF past the instability,
    # and UHF otherwise (common practice)
    assert primary(lv, 1) == "RHF" and primary(lv, 2) == "UHF"
    assert hf.state_plan(lv, 1).secondary == "unrestricted"
    assert primary(parse_level("uhf/6-31G"), 1) == "UHF"
    assert primary(parse_level("ROHF/6-31G"), 3) == "ROHF"
    rhf = parse_level("RHF/6-31G")
    assert hf.state_plan(rhf, 1).instability_check and hf.state_plan(rhf, 1).secondary is None
    with pytest.raises(LevelError, match="multiplicity is 3"):
        hf.check(rhf, parse_species("O2"), 3)
    with pytest.raises(LevelError, match="multiplicity is 2"):
        hf.check(rhf, parse_species("NO"), None)


def test_d_shell_convention():
    # Pople 6-31G* was defined with six Cartesian d functions (Hariharan & Pople 1973);
    # 6-311G and correlation-consistent sets use spherical functions (common practice)
    assert parse_level("HF/6-31G*").cartesian is True
    assert parse_level("HF/6-31G(d,p)").cartesian is True
    assert parse_level("HF/6-311G*").cartesian is False
    assert parse_level("HF/cc-pVDZ").cartesian is False
    over = parse_level("HF/6-31G*", cartesian=False)
    assert over.cartesian is False and over.cartesian_source == "user"
    assert "cartesian" in parse_level("HF/6-31G*").as_dict()["d_shells"]


def test_unknown_method_suggests_near_names():
    with pytest.raises(LevelError) as err:
        parse_level("UFH/6-31G")
    assert "UFH" in str(err.value) and "UHF" in str(err.value)


def test_unknown_basis_suggests_near_names():
    with pytest.raises(LevelError) as err:
        parse_level("HF/6-31Gx")
    assert "6-31Gx" in str(err.value)
    with pytest.raises(LevelError, match="cc-pvdx"):
        parse_level("HF/cc-pvdx")


def test_missing_slash():
    with pytest.raises(LevelError, match="METHOD/BASIS"):
        parse_level("HF")


def test_basis_lacking_an_element_names_both():
    with pytest.raises(LevelError) as err:
        check_basis_covers(parse_level("HF/6-31G"), ("Xe", "F"))
    assert "Xe" in str(err.value) and "6-31G" in str(err.value)
