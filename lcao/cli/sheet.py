"""``lcao sheet``: the parameter sheet and thermochemistry of one species."""

from __future__ import annotations

import argparse
import os

from .curve import (
    Progress,
    add_level_modifiers,
    add_grid_options,
    add_store_options,
    add_workers_option,
    apply_workers,
    check_outputs,
    open_store,
    resolve_grid,
    resolve_level,
    resolve_well_level,
    whole_points,
)

HELP = "parameter sheet for kinetics models: constants in several units, thermochemistry, NASA polynomials"
DESCRIPTION = (
    "Build a parameter sheet (sheet.json, sheet.csv) with spectroscopic constants, Morse parameters,"
    " dissociation energies, ZPE and levels in several units with provenance, the ideal-gas thermochemistry"
    " (thermo.csv) at 1 bar and two-range NASA polynomials fitted to it, from a computed curve or the shipped"
    " handbook constants; the kinetics files (thermo-species.yaml in Cantera's YAML schema, thermo-nasa7.txt in"
    " the fixed-column NASA7 layout) with the molecule, its atoms and, for ions, the electron; and the"
    " dissociation equilibrium AB <=> A + B (dissociation.csv, dissociation.png/svg)."
)


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("species", help="formula with optional charge")
    p.add_argument("--level", help="METHOD/BASIS for computed constants (default HF/6-31G)")
    add_level_modifiers(p)
    p.add_argument("--charge", type=int, help="net charge (instead of a suffix)")
    p.add_argument("--multiplicity", type=int, help="2S+1 (default: lowest-energy candidate)")
    p.add_argument("--constants", choices=("computed", "handbook", "mixed"), default="computed",
                   help="where the constants come from: a computed curve, the handbook table, or handbook where it has a value")
    p.add_argument("--isotopes", metavar="A,B", help="mass numbers, e.g. 13,16 (default most abundant)")
    p.add_argument("--anharmonic", action="store_true", help="vibrational partition function summed over the levels")
    p.add_argument("--dhf298", type=float, metavar="KJ/MOL", help="standard enthalpy of formation at 298.15 K (default: derived, with a caution)")
    p.add_argument("--polynomial", choices=("nasa7", "nasa9"), default="nasa7",
                   help="polynomial form of sheet.json and thermo-species.yaml (default nasa7; thermo-nasa7.txt is"
                        " always NASA7)")
    hand = p.add_argument_group("kinetics files and dissociation equilibrium")
    hand.add_argument("--reference-pressure", choices=("1bar", "1atm"), default="1bar",
                      help="standard-state pressure of the kinetics files' polynomials (default 1bar; many mechanisms"
                           " use 1atm); only the entropy constant changes")
    hand.add_argument("--name", metavar="SUFFIX", default="",
                      help="suffix for the molecule's name in the kinetics files, e.g. _hf631g, to keep it apart from a"
                           " handbook entry (the whole name must fit 18 columns)")
    hand.add_argument("--temperatures", metavar="LOW,COMMON,HIGH", default="200,1000,6000",
                      help="the polynomials' ranges in K (default 200,1000,6000; inside 200-6000 K)")
    hand.add_argument("--pressure", type=float, metavar="BAR", default=1.0,
                      help="total pressure for the degree of dissociation (default 1 bar)")
    add_grid_options(p)
    add_store_options(p)
    p.add_argument("--out", metavar="DIR", help="output folder (default lcao-results/SPECIES_sheet)")
    p.add_argument("--no-plots", action="store_true", help="skip thermo.png/svg")
    add_workers_option(p)


def run(args) -> int:
    from ..export.curve_files import write_outputs
    from ..export.sheet_files import d0_origin, sheet_writers
    from ..sheet import build_sheet
    from ..species import parse_species

    apply_workers(args)
    species = parse_species(args.species, args.charge)
    if args.multiplicity is not None:
        species.check_multiplicity(args.multiplicity)
    level = well = None
    if args.constants != "handbook" or args.level:
        level = resolve_level(args, args.level or "HF/6-31G")
        well = resolve_well_level(args)
    grid = resolve_grid(args, species)
    points = whole_points(args.points) if (args.points is not None and grid is None) else None
    if args.constants == "handbook":
        from ..data import handbook_row
        from ..errors import InputError

        if handbook_row(species.label) is None:
            raise InputError(f"the shipped handbook table has no row for {species.label}")
    from ..masses import resolve_isotopes
    from ..thermo.handoff import check_handoff
    from ..thermo.species_set import check_range

    resolve_isotopes(species.atoms, args.isotopes)
    t_range = check_range(_temperatures(args.temperatures))
    check_handoff(args.reference_pressure, args.pressure)
    _check_name(species.label + args.name)
    out = args.out or os.path.join("lcao-results", f"{species.slug}_sheet")
    if args.constants == "handbook":
        from ..export.io import check_out_dir

        check_out_dir(out)
    else:
        out = check_outputs(args, out)
    handoff = dict(reference_pressure=args.reference_pressure, name_suffix=args.name, temperature_range=t_range,
                   pressure_bar=args.pressure)
    progress = Progress(not args.quiet, f"{species.label} sheet")
    try:
        if args.constants == "handbook":
            sheet = build_sheet(species, level, source="handbook", isotopes=args.isotopes, anharmonic=args.anharmonic,
                                dhf298_kj_per_mol=args.dhf298, polynomial=args.polynomial,
                                **handoff)
        else:
            with open_store(args) as store:
                sheet = build_sheet(species, level, source=args.constants, multiplicity=args.multiplicity, grid=grid,
                                    points=points, store=store, isotopes=args.isotopes, anharmonic=args.anharmonic,
                                    dhf298_kj_per_mol=args.dhf298, polynomial=args.polynomial, workers=args.workers,
                                    progress=progress, well_level=well, counterpoise=args.counterpoise,
                                    branch=args.branch, **handoff)
    finally:
        progress.close()
    paths = write_outputs(sheet, out, sheet_writers(sheet))
    if not args.no_plots:
        from ..plots import save_figure
        from ..plots.thermo_plot import plot_dissociation, plot_thermo

        paths += save_figure(plot_thermo(sheet), os.path.join(out, "thermo"))
        if sheet.dissociation is not None:
            paths += save_figure(plot_dissociation(sheet), os.path.join(out, "dissociation"))
    from .report import write_page

    paths.append(write_page(out))
    r = sheet.record

    def f(key, fmt):
        v = r.get(key)
        return "-" if v is None else format(v, fmt)

    print(f"{r['species']}  constants: {sheet.provenance['source']}  ({r['level']})  isotopes {r['isotopes']}")
    print(f"  r_e {f('re_angstrom', '.5f')} A   omega_e {f('we_cm1', '.2f')} cm-1   omega_e x_e {f('wexe_cm1', '.3f')} cm-1"
          f"   B_e {f('be_cm1', '.5f')} cm-1   alpha_e {f('alpha_e_cm1', '.5f')} cm-1")
    print(f"  D_e {f('de_ev', '.3f')} eV ({f('de_kj_per_mol', '.1f')} kJ/mol)   D_0 {f('d0_ev', '.3f')} eV ({f('d0_kj_per_mol', '.1f')} kJ/mol)"
          f"   ZPE {f('zpe_cm1', '.1f')} cm-1   Morse a {f('morse_a_per_angstrom', '.4f')} 1/A")
    print(f"  symmetry number {r['symmetry_number']}   electronic degeneracy {r['electronic_degeneracy']}"
          f"   unpaired electrons {r['unpaired_electrons']}")
    print(f"  S(298.15 K) {r['s298_j_per_mol_k']:.3f} J/(mol K)   Cp(298.15 K) {r['cp298_j_per_mol_k']:.3f} J/(mol K)"
          f"   dHf(298.15 K) {r['dhf298_kj_per_mol']:.1f} kJ/mol")
    for rng in sheet.nasa.as_dict()["ranges"]:
        print(f"  {sheet.nasa.form} {rng['t_low_k']:.0f}-{rng['t_high_k']:.0f} K: largest Cp residual {100 * rng['max_relative_cp_residual']:.3f} %")
    hp = sheet.handoff
    print(f"  kinetics files: {', '.join(e.name for e in sheet.species_set)} at a reference pressure of"
          f" {'1 bar' if hp['reference_pressure'] == '1bar' else '1 atm'}")
    d = sheet.dissociation
    if d is not None:
        import numpy as np

        picks = [t for t in (1000.0, 2000.0, 3000.0, 5000.0) if d.t_k[0] <= t <= d.t_k[-1]]
        print(f"  dissociation {hp['species']} <=> {hp['products']}, resting on D_0 {d.d0_j_per_mol / 1000:.1f} kJ/mol"
              f" from {d0_origin(sheet)}:")
        for t in picks:
            i = int(np.argmin(abs(d.t_k - t)))
            print(f"    {d.t_k[i]:6.0f} K: log10 K_p/bar {d.log10_kp[i]:9.3f}   degree of dissociation at"
                  f" {d.pressure_bar:g} bar {d.alpha[i]:.4g}")
    else:
        print("  no dissociation equilibrium: the sheet has no D_0")
    for w in sheet.warnings:
        print(f"  note: {w}")
    print(f"  caution: {sheet.provenance['caution']}")
    print(f"  wrote: {', '.join(paths)}")
    return 0


def _temperatures(text: str):
    from ..errors import InputError

    parts = [x.strip() for x in text.split(",")]
    try:
        values = [float(x) for x in parts]
    except ValueError:
        values = []
    if len(values) != 3:
        raise InputError(f"--temperatures takes LOW,COMMON,HIGH in K, e.g. 200,1000,6000; got {text!r}")
    return values


def _check_name(name: str) -> None:
    """The molecule's name in the kinetics files, checked before anything is computed."""
    from ..errors import InputError
    from ..export.kinetics_files import NAME_COLUMNS

    if any(ch.isspace() for ch in name) or "!" in name:
        raise InputError(f"species name {name!r}: no spaces or '!' in a kinetics-file name")
    if len(name) > NAME_COLUMNS:
        raise InputError(f"species name {name!r} has {len(name)} characters; the fixed-column NASA7 layout holds"
                         f" {NAME_COLUMNS} (choose a shorter --name)")
