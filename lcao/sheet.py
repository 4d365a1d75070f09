"""Parameter sheets for kinetics and thermochemistry models.

One record per species and level: spectroscopic constants, Morse parameters,
dissociation energies, ZPE and levels, symmetry number, electronic degeneracy;
every number with its unit in the field name, offered in several units (all
conversions from ``scipy.constants`` via :mod:`lcao.units`), with provenance;
ideal-gas thermochemistry on a temperature grid and NASA polynomials.

Constants come from a computed curve (``source='computed'``), the shipped
handbook table (``'handbook'``), or both (``'mixed'``: handbook where it has
the value, computed otherwise); the source of each constant is recorded.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError
from .units import BOHR_ANGSTROM, ENERGY_UNITS, HARTREE_CM1, HARTREE_EV

SHEET_SCHEMA_VERSION = 1
ENERGY_FIELDS = ("de", "d0", "morse_de", "zpe", "we", "wexe", "be", "alpha_e")
LENGTH_FIELDS = ("re", "morse_re")
SOURCES = ("computed", "handbook", "mixed")
#: nuclear spins of the hydrogen isotopes (ortho/para treatment of H2, D2, T2)
HYDROGEN_NUCLEAR_SPIN = {1: 0.5, 2: 1.0, 3: 0.5}

SHEET_CAUTION = (
    "Computed dissociation energies and the enthalpies of formation derived from them are for screening: they are"
    " not fit for rate constants, equilibrium constants or safety margins without validation against evaluated"
    " data; use the handbook source or validated values for D_0 and the enthalpy of formation."
)


def expand_energy(name: str, value_hartree):
    """{name_hartree, name_ev, name_kj_per_mol, name_kcal_per_mol, name_cm1} (None stays None)."""
    return {f"{name}_{u}": None if value_hartree is None else float(value_hartree * f) for u, f in ENERGY_UNITS.items()}


def expand_length(name: str, value_bohr):
    return {
        f"{name}_bohr": None if value_bohr is None else float(value_bohr),
        f"{name}_angstrom": None if value_bohr is None else float(value_bohr * BOHR_ANGSTROM),
    }


def degeneracy_from_term(term: str | None, multiplicity: int) -> tuple[int, str]:
    """(2S+1) times 2 for Pi and higher (Lambda > 0); the term text decides Lambda."""
    if term and re.search(r"(Pi|Delta|Phi)", term):
        return 2 * multiplicity, f"{multiplicity} (spin) x 2 (Lambda > 0, term {term})"
    return multiplicity, f"{multiplicity} (spin){', term ' + term if term else ''}"


def degeneracy_from_orbitals(analysis, multiplicity: int) -> tuple[int, str]:
    """Lambda > 0 when the open pi shell of one spin holds an odd number of electrons (a Pi state); for a
    multiconfigurational point, from the state's term identified on its CI vector."""
    if getattr(analysis, "natural", None):
        term = analysis.natural["state"]
        if "Sigma" in term:
            return multiplicity, f"{multiplicity} (spin; a {term} state, from the CI vector)"
        return 2 * multiplicity, f"{multiplicity} (spin) x 2 (a {term} state, from the CI vector)"
    odd_pi = 0
    for spin in ("alpha", "beta", "both"):
        pis = [m for m in analysis.orbitals if m.spin == spin and (m.kind or "").startswith("pi") and m.formal_class != "core"]
        by_label: dict = {}
        for m in pis:
            by_label.setdefault(m.label, []).append(m.occupation)
        for occs in by_label.values():
            per = 1.0 if spin != "both" else 2.0
            filled = sum(occs) / per
            if 0 < filled < len(occs) and (int(round(filled)) % 2 == 1):
                odd_pi += 1
    if odd_pi:
        return 2 * multiplicity, f"{multiplicity} (spin) x 2 (an odd-filled pi shell: a Pi state, from the orbitals)"
    return multiplicity, f"{multiplicity} (spin; no odd-filled pi shell, a Sigma state, from the orbitals)"


@dataclass(frozen=True)
class Sheet:
    """One species-level record (``record``: flat, units in the names) and its thermochemistry."""

    record: dict
    provenance: dict
    levels_cm1: tuple
    thermo: dict
    nasa: object
    warnings: tuple = field(default=())
    species_set: tuple = ()  # ThermoEntry: the molecule, its atoms, the electron for an ion (the kinetics files)
    dissociation: object = None  # lcao.thermo.equilibrium.Dissociation, None without D_0
    handoff: dict = field(default_factory=dict)  # reference pressure, polynomial form, D_0 and its level


def _computed_constants(species, level, multiplicity, grid, store, isotopes, workers=None, progress=None,
                        well_level=None, counterpoise=False, branch="lowest"):
    from .errors import FitError
    from .fit.verdict import BOUND, METASTABLE
    from .masses import resolve_isotopes
    from .pipeline import basis_size, curve_async
    from .single_point import orbitals_async
    from .scan.session import open_session, run_sync

    async def both(session):
        res = await curve_async(session, species, level, grid, multiplicity, resolve_isotopes(species.atoms, isotopes),
                                analyse_points=False, well_level=well_level, counterpoise=counterpoise, branch=branch)
        if res.verdict is not None and res.verdict.kind not in (BOUND, METASTABLE):
            raise FitError(f"no sheet for {res.species.label} at {res.level.text}: the curve's verdict is"
                           f" {res.verdict.detail}")
        if res.fit is None:
            raise InputError(f"no fitted constants for {res.species.label} at {res.level.text}: {res.fit_error}")
        orb = await orbitals_async(session, species, level, at_minimum=True, multiplicity=res.multiplicity, grid=grid,
                                   base=res)
        return res, orb

    with open_session(store, workers, basis_size(species, level), progress) as session:
        res, orb = run_sync(both(session))
    g_el, g_why = degeneracy_from_orbitals(orb.analysis, res.multiplicity)
    vals, levels = fit_values(res.fit, res.multiplicity, g_el, orb.analysis.unpaired_electrons)
    f = res.fit
    prov = {
        "level": res.level.as_dict(),
        "reference": res.scan.reference,
        "multiplicity_source": res.multiplicity_source,
        "state": f"lowest {res.scan.reference} solution of multiplicity {res.multiplicity}; degeneracy {g_why}",
        "grid": res.grid.as_dict(),
        "local_fit_window_angstrom": [float(x * BOHR_ANGSTROM) for x in f.local.r_window],
        "morse_window_angstrom": [float(x * BOHR_ANGSTROM) for x in f.morse.window] if f.morse else None,
        "morse_kind": f.morse.kind if f.morse else None,
        "bound": f.bound,
        "verdict": None if res.verdict is None else res.verdict.kind,
        "verdict_detail": None if res.verdict is None else res.verdict.detail,
        "branch": res.branch,
        "spatial_symmetry_broken": res.scan.spatial is not None,
    }
    warns = tuple(res.scan.notes) + tuple(f.warnings)
    return vals, prov, levels, warns, res


def fit_values(f, multiplicity: int, degeneracy: int, unpaired: int | None) -> tuple[dict, tuple]:
    """The sheet's constants (atomic units) and vibrational levels (cm-1, from the minimum) of a curve fit."""
    c = f.constants
    levels = tuple(g * HARTREE_CM1 for g in f.levels.energies) if f.levels is not None else ()
    vals = {
        "re": f.local.re,
        "de": f.de,
        "d0": f.d0,
        "morse_de": f.morse.de if f.morse else None,
        "morse_a_per_bohr": f.morse.a if f.morse else None,
        "morse_re": f.morse.re if f.morse else None,
        "k_hartree_per_bohr2": f.local.k,
        "we": c["we"],
        "wexe": c["wexe"],
        "be": c["be"],
        "alpha_e": c["alpha_e"],
        "zpe": f.levels.zpe if f.levels is not None else None,
        "unpaired_electrons": unpaired,
        "multiplicity": multiplicity,
        "electronic_degeneracy": degeneracy,
    }
    return vals, levels


def _handbook_constants(species):
    from .data import handbook_row

    row = handbook_row(species.label)
    if row is None:
        raise InputError(f"the shipped handbook table has no row for {species.label}")
    to_h = 1.0 / HARTREE_CM1
    g_el, g_why = degeneracy_from_term(row["ground_term"], row["multiplicity"])
    vals = {
        "re": None if row["re_angstrom"] is None else row["re_angstrom"] / BOHR_ANGSTROM,
        "d0": None if row["d0_ev"] is None else row["d0_ev"] / HARTREE_EV,
        "we": None if row["we_cm1"] is None else row["we_cm1"] * to_h,
        "wexe": None if row["wexe_cm1"] is None else row["wexe_cm1"] * to_h,
        "be": None if row["be_cm1"] is None else row["be_cm1"] * to_h,
        "alpha_e": None if row["alpha_e_cm1"] is None else row["alpha_e_cm1"] * to_h,
        "multiplicity": row["multiplicity"],
        "electronic_degeneracy": g_el,
    }
    if vals["we"] is not None:
        wexe = vals["wexe"] or 0.0
        vals["zpe"] = vals["we"] / 2 - wexe / 4
        if vals["d0"] is not None:
            vals["de"] = vals["d0"] + vals["zpe"]
    prov = {"handbook_row": row, "state": f"{row['ground_term']}; degeneracy {g_why}"}
    return vals, prov


def build_sheet(
    species,
    level=None,
    *,
    source: str = "computed",
    multiplicity=None,
    grid=None,
    points=None,
    store=None,
    isotopes=None,
    anharmonic: bool = False,
    dhf298_kj_per_mol: float | None = None,
    polynomial: str = "nasa7",
    workers: int | None = None,
    progress=None,
    well_level=None,
    counterpoise: bool = False,
    branch: str = "lowest",
    reference_pressure: str = "1bar",
    name_suffix: str = "",
    temperature_range=None,
    pressure_bar: float = 1.0,
    precomputed: tuple | None = None,
) -> Sheet:
    """Build the parameter sheet of one species (see the module docstring).

    The kinetics hand-off: ``temperature_range`` (low, common, high) in K for every polynomial (default
    200, 1000, 6000), ``reference_pressure`` '1bar' or '1atm' for the files, ``name_suffix`` appended to
    the molecule's name there, ``pressure_bar`` for the degree of dissociation. ``precomputed``: (constants,
    provenance, levels_cm1, warnings) of a curve already fitted (a series member), used instead of running
    the curve."""
    from . import __version__
    from .masses import resolve_isotopes
    from .pipeline import caution_for, resolve_inputs
    from .species import Species, parse_species
    from .thermo import MoleculeConstants, fit_nasa, thermo_table

    from .thermo.handoff import check_handoff, kinetics_handoff
    from .thermo.species_set import DEFAULT_RANGE_K, check_range

    if source not in SOURCES:
        raise InputError(f"source {source!r} is not one of {', '.join(SOURCES)}")
    t_range = check_range(temperature_range or DEFAULT_RANGE_K)
    check_handoff(reference_pressure, pressure_bar)
    sp = species if isinstance(species, Species) else parse_species(species)
    warns: list[str] = []
    prov: dict = {"source": source}
    levels_cm1: tuple = ()
    field_sources = {}
    vals: dict = {}
    if source in ("computed", "mixed"):
        if level is None:
            raise InputError("a computed sheet needs a level of theory (--level)")
        if precomputed is not None:
            lv = level
            cvals, cprov, levels_cm1, cw = precomputed
        else:
            sp, lv, grid = resolve_inputs(sp, level, grid, multiplicity, None, points)
            if well_level is not None:
                _, well_level, _ = resolve_inputs(sp, well_level, grid, multiplicity)
            cvals, cprov, levels_cm1, cw, _res = _computed_constants(sp, lv, multiplicity, grid, store, isotopes,
                                                                     workers, progress, well_level, counterpoise, branch)
        vals.update(cvals)
        field_sources.update({k: "computed" for k, v in cvals.items() if v is not None})
        prov.update(cprov)
        warns += list(cw)
    if source in ("handbook", "mixed"):
        hvals, hprov = _handbook_constants(sp)
        if source == "mixed" and hvals.get("multiplicity") != vals.get("multiplicity"):
            warns.append(f"handbook multiplicity {hvals.get('multiplicity')} differs from the computed {vals.get('multiplicity')}; computed values kept")
        else:
            for k, v in hvals.items():
                if v is not None:
                    vals[k] = v
                    field_sources[k] = "handbook"
            if source == "mixed" and any(field_sources.get(k) == "handbook" for k in ("we", "wexe")):
                levels_cm1 = ()  # the solved levels belong to the computed curve; rebuild from handbook constants
            prov.update(hprov)
    iso = resolve_isotopes(sp.atoms, isotopes)
    mu = iso.reduced_mass_dalton
    if vals.get("be") is None and vals.get("re") is not None:  # B_e = hbar^2 / (2 mu r_e^2), in atomic units
        vals["be"] = 1.0 / (2.0 * iso.reduced_mass_me * vals["re"] ** 2)
        field_sources["be"] = f"derived from the {field_sources.get('re', 'given')} r_e: B_e = 1/(2 mu r_e^2)"
    sigma = 2 if (sp.homonuclear and iso.mass_numbers[0] == iso.mass_numbers[1]) else 1
    nuc_spin = HYDROGEN_NUCLEAR_SPIN.get(iso.mass_numbers[0]) if (sigma == 2 and sp.atoms[0] == "H") else None
    # vibrational levels for the sheet and the partition function
    we_cm1 = vals["we"] * HARTREE_CM1 if vals.get("we") is not None else None
    wexe_cm1 = vals["wexe"] * HARTREE_CM1 if vals.get("wexe") is not None else 0.0
    if not levels_cm1 and we_cm1 is not None:
        d_cm1 = vals["de"] * HARTREE_CM1 if vals.get("de") else None
        vmax = int(we_cm1 / (2 * wexe_cm1) - 0.5) if wexe_cm1 > 0 else 40
        if d_cm1 is not None and wexe_cm1 > 0:
            vmax = min(vmax, int(d_cm1 / we_cm1 * 2))
        v = np.arange(max(vmax, 1) + 1) + 0.5
        levels_cm1 = tuple(float(x) for x in we_cm1 * v - wexe_cm1 * v**2)  # G(v) from the minimum
    elif levels_cm1:
        levels_cm1 = tuple(float(x) for x in levels_cm1)
    rec: dict = {"species": sp.label, "level": level.text if hasattr(level, "text") else (level or "handbook")}
    for name in ENERGY_FIELDS:
        rec.update(expand_energy(name, vals.get(name)))
    for name in LENGTH_FIELDS:
        rec.update(expand_length(name, vals.get(name)))
    a = vals.get("morse_a_per_bohr")
    rec["morse_a_per_bohr"] = a
    rec["morse_a_per_angstrom"] = None if a is None else a / BOHR_ANGSTROM
    k = vals.get("k_hartree_per_bohr2")
    if k is None and vals.get("we") is not None:
        k = vals["we"] ** 2 * iso.reduced_mass_me
    rec["k_hartree_per_bohr2"] = k
    from .units import HARTREE_J

    rec["k_newton_per_metre"] = None if k is None else k * HARTREE_J / (BOHR_ANGSTROM * 1e-10) ** 2
    rec.update(
        reduced_mass_dalton=mu,
        reduced_mass_electron_masses=iso.reduced_mass_me,
        isotopes=iso.label(sp.atoms),
        molecular_mass_dalton=sum(iso.masses_dalton),
        symmetry_number=sigma,
        electronic_degeneracy=vals.get("electronic_degeneracy"),
        multiplicity=vals.get("multiplicity"),
        unpaired_electrons=vals.get("unpaired_electrons", (vals.get("multiplicity") or 1) - 1),
    )
    for v in range(min(5, len(levels_cm1))):
        rec[f"g{v}_cm1"] = levels_cm1[v]
    # thermochemistry
    if vals.get("be") is None or we_cm1 is None:
        raise InputError(f"{sp.label}: B_e and omega_e are needed for thermochemistry")
    b_cm1 = vals["be"] * HARTREE_CM1
    b0 = b_cm1 - 0.5 * vals["alpha_e"] * HARTREE_CM1 if vals.get("alpha_e") is not None else b_cm1
    molc = MoleculeConstants(sum(iso.masses_dalton), sigma, b0, we_cm1, int(vals.get("electronic_degeneracy") or 1),
                             levels_cm1 if anharmonic else None, nuc_spin)
    from .thermo.species_set import fragments_of, temperature_grid

    t = temperature_grid(t_range)
    table = thermo_table(molc, t)
    s298 = float(thermo_table(molc, [298.15])["s_j_per_mol_k"][0])
    fragments = fragments_of(sp, iso.mass_numbers)
    dhf_note = "given by the user"
    if dhf298_kj_per_mol is None:
        dhf298_kj_per_mol, dhf_note = derived_dhf298(sp, vals, molc, fragments)
        warns.append(dhf_note)
    lo, mid, hi = t_range
    nasa = fit_nasa(t, table["cp_j_per_mol_k"], s298, dhf298_kj_per_mol, lo, mid, hi, form=polynomial)
    rec["dhf298_kj_per_mol"] = dhf298_kj_per_mol
    rec["s298_j_per_mol_k"] = s298
    rec["cp298_j_per_mol_k"] = float(thermo_table(molc, [298.15])["cp_j_per_mol_k"][0])
    rec["h298_minus_h0_kj_per_mol"] = float(table["h298_minus_h0_kj_per_mol"])
    level_text = {"computed": f"constants from {rec['level']}",
                  "handbook": f"handbook constants ({(prov.get('handbook_row') or {}).get('source', 'shipped table')})",
                  "mixed": f"handbook constants where the table has them, else from {rec['level']}"}[source]
    species_set, dissoc, handoff = kinetics_handoff(
        sp, molc, table, nasa, fragments, vals, t_range, polynomial, reference_pressure, name_suffix, pressure_bar,
        f"{sp.label}: {level_text}; Delta_f H(298.15 K) {dhf298_kj_per_mol:.3f} kJ/mol {dhf_note}")
    import pyscf

    prov.update(
        field_sources=field_sources,
        versions={"lcao": __version__, "pyscf": pyscf.__version__},
        date=_dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        rotational_constant_for_thermo_cm1=b0,
        rotational_constant_note="B_0 = B_e - alpha_e/2" if vals.get("alpha_e") is not None else "B_e (no alpha_e)",
        vibration="anharmonic (sum over the levels)" if anharmonic else "harmonic (omega_e)",
        nuclear_spin_isomers=None if nuc_spin is None else f"frozen ortho/para mixture, I = {nuc_spin}",
        dhf298=dhf_note,
        standard_pressure_bar=1.0,
        warnings=warns,
        caution=(caution_for(lv) + " " if source != "handbook" else "") + SHEET_CAUTION,
    )
    return Sheet(rec, prov, levels_cm1, table, nasa, tuple(warns), species_set, dissoc, handoff)


def derived_dhf298(sp, vals, molc, fragments) -> tuple[float, str]:
    """Delta_f H(298.15) from D_0 and the separated atoms' enthalpies of formation, with its caution.

    Delta_f H(AB) = Delta_f H(A) + Delta_f H(B) - D_0 - [H298 - H0](A) - [H298 - H0](B) + [H298 - H0](AB),
    with every H298 - H0 from the same partition functions as the tables (atoms with their fine structure),
    so that the kinetics files reproduce K_p from D_0."""
    from .thermo.species_set import atom_dhf298, thermal_enthalpy_298

    if vals.get("d0") is None:
        raise InputError(f"cannot derive the enthalpy of formation of {sp.label}: no D_0; give it with --dhf298 (kJ/mol)")
    try:
        atoms_dhf = [atom_dhf298(a)[0] for a in fragments]
    except InputError as exc:
        raise InputError(f"cannot derive the enthalpy of formation of {sp.label}: {exc}; give it with --dhf298 (kJ/mol)") from None
    d0_kj = vals["d0"] * ENERGY_UNITS["kj_per_mol"]
    h_atoms = sum(thermal_enthalpy_298(a) for a in fragments)
    dhf = sum(atoms_dhf) - d0_kj - h_atoms + thermal_enthalpy_298(molc)
    products = " + ".join(a.name for a in fragments)
    note = (
        f"enthalpy of formation derived from D_0 = {d0_kj:.1f} kJ/mol (to {products}) and the atoms' shipped values:"
        " it inherits the whole error of D_0 at this level (hundreds of kJ/mol at Hartree-Fock, a few at CCSD(T) near"
        " the basis-set limit); supply a validated value with --dhf298 for any real use"
    )
    return float(dhf), note


def sheet_document(sheet: Sheet) -> dict:
    return {
        "schema_version": SHEET_SCHEMA_VERSION,
        "kind": "lcao parameter sheet",
        "records": [
            {
                **sheet.record,
                "vibrational_levels_cm1": list(sheet.levels_cm1[:10]),
                "thermo": {k: (v.tolist() if hasattr(v, "tolist") else v) for k, v in sheet.thermo.items()},
                "polynomial": sheet.nasa.as_dict(),
                "provenance": sheet.provenance,
            }
        ],
    }


def is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and v is not None and math.isfinite(v)
