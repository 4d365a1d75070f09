"""What the orbitals say at one computed point: characters, bond orders, spin, overlaps.

:func:`analyse` takes a converged PySCF SCF object of a diatomic (no symmetry,
atoms on the z axis) and returns an :class:`OrbitalAnalysis`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..methods.molecule import ao_labels
from ..methods.molecule import overlap as ao_overlap
from .character import homonuclear_class, homonuclear_name, period, prototypes, valence_slots
from .populations import atom_slices, mayer_bond_order, mo_compositions, mo_overlap_populations, mulliken_overlap_population
from .symmetry import kind_label, symmetry_basis, symmetry_weights_all

#: Per-electron MO overlap population below which an MO counts as nonbonding
#: by overlap population (electrons).
NONBONDING_OVERLAP = 0.02
#: an MO with less than symmetry.PURE but at least this weight in one kind gets
#: its formal class from that dominant kind (with a note); below it, unclassified
DOMINANT = 0.75
#: composition entries smaller than this (percent) are left out of the summary
COMPOSITION_MIN_PERCENT = 2.0


@dataclass(frozen=True)
class MOInfo:
    """One molecular orbital of one spin.

    Attributes:
        index: position in energy order within its spin (0-based).
        spin: 'alpha', 'beta' or 'both' (restricted).
        energy_hartree: orbital energy.
        occupation: electrons in it (0, 1 or 2).
        label: '2sigma_g', '1pi', ... or None when mixed; kind 'sigma_g', 'pi', ...
        weights: symmetry weights by kind (sum 1).
        formal_class: 'core', 'bonding', 'antibonding', 'nonbonding',
            'outside the valence pattern' or 'unclassified (mixed symmetry)'.
        valence_name: 'sigma 2s', 'pi* 2p', ... where it applies.
        overlap_population: per electron, between the atoms (Mulliken 1955).
        overlap_character: 'bonding', 'antibonding' or 'nonbonding' by that population.
        composition: AO group (atom and shell, e.g. 'N1 2p') -> percent, all
            groups (Mulliken gross populations; they sum to 100).
    """

    index: int
    spin: str
    energy_hartree: float
    occupation: float
    label: str | None
    kind: str | None
    weights: dict
    formal_class: str
    valence_name: str | None
    overlap_population: float
    overlap_character: str
    composition: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        return {
            "index": self.index,
            "spin": self.spin,
            "energy_hartree": self.energy_hartree,
            "occupation": self.occupation,
            "label": self.label,
            "kind": self.kind,
            "symmetry_weights": self.weights,
            "formal_class": self.formal_class,
            "valence_name": self.valence_name,
            "overlap_population_per_electron": self.overlap_population,
            "overlap_population_character": self.overlap_character,
            "composition_percent": self.composition,
            "main_components": self.main_components(),
        }

    def main_components(self) -> str:
        """The AO groups of at least COMPOSITION_MIN_PERCENT, e.g. 'N1 2p 50 %, N2 2p 50 %'."""
        return ", ".join(f"{g} {v:.0f} %" for g, v in self.composition.items() if v >= COMPOSITION_MIN_PERCENT)


@dataclass(frozen=True)
class OrbitalAnalysis:
    """Orbital analysis of one point (see the README for the definitions)."""

    r_bohr: float
    reference: str
    orbitals: tuple[MOInfo, ...]
    mo_count_bond_order: float | None
    mo_count_note: str | None
    mulliken_overlap: float
    mayer_bond_order: float
    overlap_character_bond_order: float
    n_alpha: int
    n_beta: int
    s2: float
    s2_exact: float
    unpaired_orbitals: tuple[str, ...]
    overlaps: dict
    #: for a multiconfigurational point: the active space, the state's term, the effective bond order, the
    #: leading configuration's weight and the natural occupations (:mod:`lcao.methods.multireference`)
    natural: dict | None = None

    @property
    def unpaired_electrons(self) -> int:
        return self.n_alpha - self.n_beta

    @property
    def magnetism(self) -> str:
        return "paramagnetic" if self.unpaired_electrons > 0 else "diamagnetic"

    def frontier(self) -> dict:
        occ = [m for m in self.orbitals if m.occupation > 0]
        vir = [m for m in self.orbitals if m.occupation == 0]
        homo = max(occ, key=lambda m: m.energy_hartree) if occ else None
        lumo = min(vir, key=lambda m: m.energy_hartree) if vir else None
        return {
            "homo": None if homo is None else {"label": homo.label, "spin": homo.spin, "energy_hartree": homo.energy_hartree, "formal_class": homo.formal_class},
            "lumo": None if lumo is None else {"label": lumo.label, "spin": lumo.spin, "energy_hartree": lumo.energy_hartree, "formal_class": lumo.formal_class},
        }

    def bond_orders(self) -> dict:
        out = {} if self.natural is None else {"effective": self.natural["effective_bond_order"]}
        return out | {
            "mo_count": self.mo_count_bond_order,
            "mo_count_note": self.mo_count_note,
            "mulliken": self.mulliken_overlap,
            "mayer": self.mayer_bond_order,
            "overlap_character_count": self.overlap_character_bond_order,
        }


def _natural(mf) -> bool:
    """Whether ``mf`` holds natural orbitals (a class attribute ``natural``; looked up on the class, since
    asking a PySCF SCF object for an attribute it lacks imports the whole of PySCF, 0.14 s in each worker)."""
    return bool(getattr(type(mf), "natural", False))


def _spin_sets(mf):
    """[(spin name, mo_coeff, mo_energy, mo_occ)] for RHF/ROHF/UHF objects."""
    c = np.asarray(mf.mo_coeff)
    e = np.asarray(mf.mo_energy)
    occ = np.asarray(mf.mo_occ)
    if _natural(mf):  # natural orbitals: one set, occupations between 0 and 2
        return [("both", c, e, occ)]
    if c.ndim == 3:
        return [("alpha", c[0], e[0], occ[0]), ("beta", c[1], e[1], occ[1])]
    if np.any(occ == 1):  # ROHF: split into alpha and beta occupations
        return [("alpha", c, e, (occ > 0).astype(float)), ("beta", c, e, (occ > 1).astype(float))]
    return [("both", c, e, occ)]


def _ao_groups(mol) -> dict[str, np.ndarray]:
    """AO groups by atom and shell type, e.g. 'N1 2s' (valence n and the split-valence partner together)."""
    groups: dict[str, list[int]] = {}
    for i, (ia, sym, shell, _comp) in enumerate(ao_labels(mol, fmt=False)):
        n = int("".join(ch for ch in shell if ch.isdigit()) or 0)
        l = shell.lstrip("0123456789")
        z = int(mol.atom_charge(ia))
        n_val = period(z)
        if l in ("s", "p") and n > n_val:
            n = n_val  # outer split-valence contraction of the valence shell
        groups.setdefault(f"{sym}{ia + 1} {n}{l}", []).append(i)
    return {k: np.array(v) for k, v in groups.items()}


def analyse(mf, ncore: int | None = None, fock=None) -> OrbitalAnalysis:
    """Analyse a converged SCF of a diatomic.

    Args:
        mf: PySCF RHF, ROHF or UHF object (converged).
        ncore: core orbitals per spin (default: the atoms' noble-gas cores).
        fock: the Fock matrix of the converged density when already at hand.
    """
    from .character import core_orbitals

    mol = mf.mol
    s = ao_overlap(mol)
    sl = atom_slices(mol)
    basis = symmetry_basis(mol)
    homo = basis.homonuclear
    symbols = (f"{mol.atom_symbol(0)}", f"{mol.atom_symbol(1)}")
    ncore = sum(core_orbitals(int(mol.atom_charge(i))) for i in (0, 1)) if ncore is None else ncore
    groups = _ao_groups(mol)
    dm = np.asarray(mf.make_rdm1())
    dma, dmb = (dm[0], dm[1]) if dm.ndim == 3 else (dm / 2, dm / 2)
    fock = np.asarray(mf.get_fock(dm=dm) if fock is None else fock)
    fdiag = np.diag(fock.mean(axis=0)) if fock.ndim == 3 else np.diag(fock)
    slots = valence_slots(mol, fdiag)
    protos = {lam: prototypes(slots[lam][0], slots[lam][1], lam, symbols) for lam in (0, 1)}
    n_val = max(period(int(mol.atom_charge(0))), period(int(mol.atom_charge(1))))

    orbitals = []
    nb = na = 0.0
    nb_op = na_op = 0.0
    undefined = []
    broken = []
    unpaired = []
    for spin, c, e, occ in _spin_sets(mf):
        counters: dict[str, int] = {}
        valence_seen: dict = {}
        # natural orbitals count in the order of their occupations (core, active by occupation, the rest)
        order = np.lexsort((e, -np.round(occ, 8))) if _natural(mf) else np.argsort(e, kind="stable")
        all_weights = symmetry_weights_all(c, s, basis)
        all_ops = mo_overlap_populations(c, s, sl)
        all_comps = mo_compositions(c, s, groups)
        for rank, i in enumerate(order):
            weights = all_weights[i]
            kind, lam, par, summary = kind_label(weights, homo)
            dominant = None
            if kind is None and summary:
                top = next(iter(summary))
                if summary[top] >= DOMINANT:
                    dominant = top
            # numbering within each kind (pi and delta come in degenerate pairs)
            label = None
            if kind is not None:
                counters[kind] = counters.get(kind, 0) + 1
                size = 1 if lam == 0 else 2
                label = f"{(counters[kind] + size - 1) // size}{kind}"
            op = float(all_ops[i])
            op_char = "bonding" if op > NONBONDING_OVERLAP else "antibonding" if op < -NONBONDING_OVERLAP else "nonbonding"
            vname = None
            ckind, clam, cpar = kind, lam, par
            if kind is None and dominant is not None:
                ckind = dominant
                clam = {"sigma": 0, "pi": 1, "delta": 2, "phi": 3}.get(dominant.split("_")[0], 9)
                cpar = dominant.split("_")[1] if "_" in dominant else None
            if rank < ncore:
                formal = "core"
            elif ckind is None:
                formal = "unclassified (mixed symmetry)"
            elif homo:
                formal = homonuclear_class(clam, cpar)
                key = ckind
                valence_seen[key] = valence_seen.get(key, 0) + 1
                size = 1 if clam == 0 else 2
                vname = homonuclear_name(clam, cpar, (valence_seen[key] + size - 1) // size, n_val)
            else:
                key = clam
                valence_seen[key] = valence_seen.get(key, 0) + 1
                size = 1 if clam == 0 else 2
                k = (valence_seen[key] + size - 1) // size - 1
                plist = protos.get(clam, [])
                if k < len(plist):
                    formal = plist[k].kind
                    vname = plist[k].name
                else:
                    formal = "outside the valence pattern"
            comp = {g: round(v, 3) for g, v in sorted(all_comps[i].items(), key=lambda kv: -kv[1])}
            n_el = float(occ[i])
            if dominant is not None and rank >= ncore and n_el > 0:
                broken.append(f"{spin} orbital {rank} ({100 * summary[dominant]:.0f} % {dominant})")
            if n_el > 0:
                if formal == "bonding":
                    nb += n_el
                elif formal == "antibonding":
                    na += n_el
                elif formal not in ("core", "nonbonding"):
                    undefined.append(label or f"orbital {i}")
                if rank >= ncore:
                    if op_char == "bonding":
                        nb_op += n_el
                    elif op_char == "antibonding":
                        na_op += n_el
            orbitals.append(
                MOInfo(int(rank), spin, float(e[i]), n_el, label, kind, summary, formal, vname, op, op_char, comp)
            )
    # unpaired electrons: alpha occupied orbitals least contained in the beta occupied space
    sets = _spin_sets(mf)
    n_alpha = int(round(float(np.sum(sets[0][3]))))
    n_beta = int(round(float(np.sum(sets[-1][3])))) if len(sets) == 2 else n_alpha
    if len(sets) == 1:
        n_alpha = n_beta = int(round(float(np.sum(sets[0][3])) / 2))
    if n_alpha > n_beta:
        ca = sets[0][1][:, sets[0][3] > 0]
        cb = sets[1][1][:, sets[1][3] > 0]
        overlap = np.sum((cb.T @ s @ ca) ** 2, axis=0)
        ea = sets[0][2][sets[0][3] > 0]
        pick = np.argsort(overlap, kind="stable")[: n_alpha - n_beta]
        alpha_infos = [m for m in orbitals if m.spin == "alpha" and m.occupation > 0]
        alpha_infos.sort(key=lambda m: m.energy_hartree)
        eorder = np.argsort(ea, kind="stable")
        for p in sorted(pick):
            m = alpha_infos[int(np.where(eorder == p)[0][0])]
            unpaired.append(m.label or f"alpha orbital {m.index}")
    s_val = (n_alpha - n_beta) / 2.0
    try:
        s2 = float(mf.spin_square()[0]) if hasattr(mf, "spin_square") else s_val * (s_val + 1)
    except Exception:  # pragma: no cover
        s2 = s_val * (s_val + 1)
    if undefined:
        bo, note = None, f"undefined: occupied orbitals {', '.join(undefined)} fit no bonding pattern"
    else:
        bo, note = (nb - na) / 2.0, None
        if broken:
            note = "symmetry-broken occupied orbitals classified by their dominant symmetry: " + ", ".join(broken)
    return OrbitalAnalysis(
        r_bohr=float(mol.atom_coord(1)[2] - mol.atom_coord(0)[2]),
        reference=type(mf).__name__,
        orbitals=tuple(orbitals),
        mo_count_bond_order=bo,
        mo_count_note=note,
        mulliken_overlap=mulliken_overlap_population(dma + dmb, s, sl),
        mayer_bond_order=mayer_bond_order(dma, dmb, s, sl),
        overlap_character_bond_order=(nb_op - na_op) / 2.0,
        n_alpha=n_alpha,
        n_beta=n_beta,
        s2=s2,
        s2_exact=s_val * (s_val + 1),
        unpaired_orbitals=tuple(unpaired),
        overlaps=valence_overlaps(mol, s),
    )


def valence_overlaps(mol, s) -> dict:
    """Overlap integrals between the two atoms' valence AOs (minimal-basis partner first).

    p functions are oriented with their positive lobe towards the other atom,
    so a bonding sigma overlap is positive. Keys: 's-s', 's-p sigma',
    'p-s sigma', 'p-p sigma', 'p-p pi'.
    """
    from .character import valence_aos

    a, b = valence_aos(mol, 0), valence_aos(mol, 1)
    out = {}

    def first(lst):
        return lst[0] if lst else None

    sa, sb = first(a["s"]), first(b["s"])
    pza, pzb = first(a["pz"]), first(b["pz"])
    pxa, pxb = first(a["px"]), first(b["px"])
    labels = ao_labels(mol)
    if sa is not None and sb is not None:
        out["s-s"] = float(s[sa, sb])
    if sa is not None and pzb is not None:
        out["s-p sigma"] = float(-s[sa, pzb])  # B's p_z points away from A
    if pza is not None and sb is not None:
        out["p-s sigma"] = float(s[pza, sb])
    if pza is not None and pzb is not None:
        out["p-p sigma"] = float(-s[pza, pzb])
    if pxa is not None and pxb is not None:
        out["p-p pi"] = float(s[pxa, pxb])
    out["functions"] = {k: v for k, v in (("A s", sa), ("B s", sb), ("A p", pza), ("B p", pzb)) if v is not None}
    out["functions"] = {k: labels[v].strip() for k, v in out["functions"].items()}
    return out
