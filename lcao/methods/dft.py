"""Kohn-Sham density functional theory: any functional PySCF's libxc interface knows, by its name.

``B3LYP/...``, ``PBE0/...``, ``PBE/...``, ``M06-2X/...``, ``wB97X-D/...`` and every other name libxc
parses. Without a prefix the reference is chosen as for Hartree-Fock: RKS for a closed-shell singlet,
followed into broken-symmetry UKS past the RKS -> UKS instability (the curve of a singlet that
dissociates into open-shell atoms), UKS otherwise; ``U``, ``R`` and ``RO`` prefixes ask for one
(``UB3LYP``; a name that is itself a functional, such as RPBE, stays one). Every output records the
functional as PySCF evaluates it (its libxc components, the exact-exchange fraction and range
separation) and the integration grid.
"""

from __future__ import annotations

from functools import lru_cache

from ..errors import LevelError
from .scf_method import SelfConsistentField

#: functionals named in the documentation; any other libxc name is accepted too
COMMON = ("B3LYP", "PBE0", "PBE", "M06-2X", "WB97X-D", "BLYP", "TPSS", "SCAN", "B97-D", "CAM-B3LYP")
_PREFIXES = (("RO", "ROHF"), ("U", "UHF"), ("R", "RHF"))


@lru_cache(maxsize=512)
def _known(name: str) -> bool:
    if name in ("HF", "RHF", "UHF", "ROHF"):
        return False
    try:
        from pyscf.dft import libxc

        libxc.parse_xc(name)
        return True
    except (KeyError, ValueError, TypeError):
        return False


def split_name(name: str) -> tuple[str, str]:
    """(reference choice, functional) of a method name: 'UB3LYP' -> ('UHF', 'B3LYP')."""
    name = name.upper()
    if _known(name):
        return "auto", name
    for prefix, ref in _PREFIXES:
        if name.startswith(prefix) and _known(name[len(prefix):]):
            return ref, name[len(prefix):]
    raise LevelError(f"unknown functional {name!r}")


def functional_description(xc: str) -> dict:
    """The functional as PySCF evaluates it: libxc components with weights, exact exchange, range
    separation, and libxc's reference."""
    from pyscf.dft import libxc

    (hyb, alpha, omega), parts = libxc.parse_xc(xc)
    names = {v: k for k, v in libxc.XC_CODES.items() if k.startswith(("LDA_", "GGA_", "MGGA_", "HYB_"))}
    comps = [{"libxc": names.get(int(code), str(int(code))), "weight": float(w)} for code, w in parts]
    hyb_x = float(libxc.hybrid_coeff(xc)) if libxc.is_hybrid_xc(xc) else 0.0
    rsh = [float(x) for x in libxc.rsh_coeff(xc)] if libxc.is_hybrid_xc(xc) else [0.0, 0.0, 0.0]
    try:
        refs = list(libxc.xc_reference(xc))
    except Exception:  # pragma: no cover - older PySCF
        refs = []
    out = {"name": xc, "libxc_components": comps, "exact_exchange_fraction": hyb_x,
           "range_separation": {"omega": rsh[0], "alpha": rsh[1], "beta": rsh[2]}, "libxc_reference": refs}
    if "-D" in xc.upper() and not xc.upper().endswith(("D3", "D3BJ", "D4")):
        out["note"] = "the empirical dispersion term of this functional's name is not evaluated: libxc gives the functional only"
    return out


class KohnSham(SelfConsistentField):
    """The Kohn-Sham family (see the module docstring)."""

    names = COMMON
    labels = {"RHF": "RKS", "UHF": "UKS", "ROHF": "ROKS"}

    def accepts(self, name: str) -> bool:
        try:
            split_name(name)
            return True
        except LevelError:
            return False

    def name_pool(self):
        from pyscf.dft import libxc

        return tuple(COMMON) + tuple(libxc.XC_ALIAS) + tuple(libxc.XC_CODES)

    def choice(self, level) -> str:
        return split_name(level.method)[0]

    def xc(self, level) -> str:
        return split_name(level.method)[1]

    def seconds_per_point(self, basis_size: int) -> float:
        # measured: a warm-started B3LYP point of N2 in 6-31G* (30 functions, grid level 3) about 0.2 s
        return 0.2 * (max(basis_size, 1) / 30.0) ** 3

    def describe(self, level) -> dict:
        from .scf import GRID_LEVEL

        return {"method": "Kohn-Sham DFT", "functional": functional_description(self.xc(level)),
                "grid": {"pyscf_grid_level": GRID_LEVEL, "pruning": "PySCF default (NWChem-style)"},
                "reference": {"auto": "RKS for closed-shell singlets (followed into broken-symmetry UKS past the"
                              " instability), UKS otherwise"}.get(self.choice(level), self.labels[self.choice(level)])}

    def caution(self, level) -> str:
        return (f"{self.xc(level)} is one density functional among many: bond lengths are usually within about"
                " 0.01-0.02 A and harmonic wavenumbers within a few percent, but dissociation energies can be off by"
                " 0.1-0.5 eV and the error depends on the functional and the bond (published benchmarks such as"
                " GMTKN55). Broken-symmetry curves of singlets are spin-contaminated at long range. Results that feed a"
                " process, kinetics or safety model need validated data and the judgement of licensed practice.")
