"""Distance grids."""

import pytest

from lcao.errors import GridError
from lcao.scan.grid import default_grid, expected_bond_length_bohr, range_grid


def test_range_grid_angstrom_in_bohr_out():
    g = range_grid(0.5, 1.5, 11)
    assert len(g) == 11
    assert g.r_angstrom[0] == pytest.approx(0.5) and g.r_angstrom[-1] == pytest.approx(1.5)


@pytest.mark.parametrize(
    "args,fragment",
    [
        ((0.0, 2.0, 10), "positive"),
        ((-1.0, 2.0, 10), "positive"),
        (("abc", 2.0, 10), "'abc'"),
        ((2.0, 1.0, 10), "greater"),
        ((0.1, 2.0, 10), "nuclei nearly coincide"),
        ((0.5, 2.0, "x"), "'x'"),
        ((0.5, 2.0, 0), "between"),
        ((0.5, 40.0, 10), "longer"),
    ],
)
def test_bad_ranges(args, fragment):
    with pytest.raises(GridError) as err:
        range_grid(*args)
    assert fragment in str(err.value)


def test_default_grid_reaches_far_and_is_denser_in_the_well():
    g = default_grid(7, 7)
    re_ = expected_bond_length_bohr(7, 7)
    r = g.r_bohr
    assert r[-1] >= 2.5 * re_
    steps = [b - a for a, b in zip(r, r[1:])]
    assert max(steps[:10]) < min(steps[-5:])
