"""The point-by-point comparison of benchmarks/numbers.py (the check that speed work changed no number)."""

import math

from benchmarks.numbers import compare


def _entry(final, sweep, re=1.1, branch=None):
    return {"final_hartree": final, "branch": branch or ["b"] * len(final),
            "sweeps_hartree": {"restricted/from-atoms": sweep}, "refined_hartree": [-1.0], "re_angstrom": re}


def test_identical_records_differ_nowhere():
    a = {"N2 HF/STO-3G": _entry([-107.5, -107.6, None], [-107.5, -107.6, -107.4])}
    assert compare(a, a) == [("N2 HF/STO-3G", 0, 0.0, [])]


def test_a_last_bit_a_lost_point_and_a_changed_branch_are_all_reported():
    a = {"O2 HF/6-31G": _entry([-149.6, -149.7], [-149.6, -149.7])}
    b = {"O2 HF/6-31G": _entry([-149.6, math.nextafter(-149.7, 0)], [-149.6, None], branch=["b", "c"])}
    (name, differing, worst, notes), = compare(a, b)
    assert name == "O2 HF/6-31G" and differing == 2 and worst == math.inf
    assert notes == ["branches differ"]
    c = {"O2 HF/6-31G": _entry([-149.6, -149.7 + 3e-6], [-149.6, -149.7])}
    (_, differing, worst, notes), = compare(a, c)
    assert differing == 1 and abs(worst - 3e-6) < 1e-12 and notes == []


def test_a_curve_in_one_record_only_is_reported():
    a = {"N2 HF/STO-3G": _entry([-107.5], [-107.5])}
    (name, _, worst, notes), = compare(a, {})
    assert worst == math.inf and notes == ["only in one record"]
