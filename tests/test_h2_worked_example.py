"""H2 in STO-3G at R = 1.4 bohr against the worked example of
Szabo & Ostlund, Modern Quantum Chemistry (1982/1989), section 3.5.2:
S12 = 0.6593, orbital energies -0.578 and +0.670 Eh, E = -1.1167 Eh."""

import numpy as np
import pytest

from lcao.levels import parse_level
from lcao.methods.molecule import build_molecule
from lcao.methods.scf import solve


def test_szabo_ostlund_h2_sto3g():
    mol = build_molecule(("H", "H"), 1.4, parse_level("HF/STO-3G"), 0, 0)
    s = mol.intor("int1e_ovlp")
    assert s[0, 1] == pytest.approx(0.6593, abs=1e-4)
    sol = solve(mol, "RHF")
    assert sol.converged
    assert sol.energy == pytest.approx(-1.1167, abs=1e-4)
    eps = np.sort(sol.scf.mo_energy)
    assert eps[0] == pytest.approx(-0.578, abs=1e-3)
    assert eps[1] == pytest.approx(0.670, abs=1e-3)
