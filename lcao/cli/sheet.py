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
    " handbook constants."
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
    p.add_argument("--polynomial", choices=("nasa7", "nasa9"), default="nasa7", help="polynomial form (default nasa7)")
    add_grid_options(p)
    add_store_options(p)
    p.add_argument("--out", metavar="DIR", help="output folder (default lcao-results/SPECIES_sheet)")
    p.add_argument("--no-plots", action="store_true", help="skip thermo.png/svg")
    add_workers_option(p)


def run(args) -> int:
    from ..export.curve_files import write_outputs
    from ..export.sheet_files import SHEET_WRITERS
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

    resolve_isotopes(species.atoms, args.isotopes)
    out = args.out or os.path.join("lcao-results", f"{species.slug}_sheet")
    if args.constants == "handbook":
        from ..export.io import check_out_dir

        check_out_dir(out)
    else:
        out = check_outputs(args, out)
    progress = Progress(not args.quiet, f"{species.label} sheet")
    try:
        if args.constants == "handbook":
            sheet = build_sheet(species, level, source="handbook", isotopes=args.isotopes, anharmonic=args.anharmonic,
                                dhf298_kj_per_mol=args.dhf298, polynomial=args.polynomial)
        else:
            with open_store(args) as store:
                sheet = build_sheet(species, level, source=args.constants, multiplicity=args.multiplicity, grid=grid,
                                    points=points, store=store, isotopes=args.isotopes, anharmonic=args.anharmonic,
                                    dhf298_kj_per_mol=args.dhf298, polynomial=args.polynomial, workers=args.workers,
                                    progress=progress, well_level=well, counterpoise=args.counterpoise,
                                    branch=args.branch)
    finally:
        progress.close()
    paths = write_outputs(sheet, out, SHEET_WRITERS)
    if not args.no_plots:
        from ..plots import save_figure
        from ..plots.thermo_plot import plot_thermo

        paths += save_figure(plot_thermo(sheet), os.path.join(out, "thermo"))
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
    for w in sheet.warnings:
        print(f"  note: {w}")
    print(f"  caution: {sheet.provenance['caution']}")
    print(f"  wrote: {', '.join(paths)}")
    return 0
