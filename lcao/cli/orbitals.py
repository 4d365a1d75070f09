"""``lcao orbitals``: orbital characters, bond orders and spin at one distance."""

from __future__ import annotations

import argparse

from .curve import (
    Progress,
    add_grid_options,
    add_level_options,
    add_store_options,
    add_workers_option,
    check_outputs,
    open_store,
    resolve_args,
)

HELP = "analyse the orbitals at one distance: characters, bond orders, magnetism, overlaps"
DESCRIPTION = (
    "Compute one distance with the same protocol as 'lcao curve' (or the fitted minimum of a curve with"
    " --at-minimum) and report every MO's character, the bond orders, unpaired electrons and overlap integrals."
    " Writes orbitals.json and an orbital energy-level diagram (PNG and SVG)."
)


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("species", help="formula with optional charge: N2, CO, NO+, CN-, C2^2-")
    where = p.add_mutually_exclusive_group(required=True)
    where.add_argument("--r", dest="r", metavar="DIST", help="bond distance, angstrom")
    where.add_argument("--at-minimum", action="store_true", help="at the fitted r_e of a curve (grid options apply)")
    p.add_argument(
        "--branch",
        choices=("well", "lowest", "restricted", "unrestricted", "symmetric"),
        default="well",
        help="which solution to analyse (default: restricted for a closed-shell singlet under HF, else the lowest;"
             " symmetric: the symmetry-adapted one where the lowest breaks the molecule's spatial symmetry)",
    )
    add_level_options(p, well=False)
    add_grid_options(p)
    add_store_options(p)
    p.add_argument("--out", metavar="DIR", help="output folder (default: lcao-results/SPECIES_METHOD_BASIS_orbitals)")
    add_workers_option(p)
    p.add_argument("--no-plots", action="store_true", help="skip the diagram")


def _distance(text):
    from ..errors import GridError
    from ..scan.grid import MIN_DISTANCE_ANGSTROM, range_grid

    try:
        r = float(text)
    except ValueError:
        raise GridError(f"--r must be a number of angstrom, got {text!r}") from None
    range_grid(r, r, 1)  # validates positivity and limits
    if r < MIN_DISTANCE_ANGSTROM:  # pragma: no cover - range_grid already refuses it
        raise GridError(f"--r {r} A is too short")
    return r


def table_lines(res) -> list[str]:
    from ..methods import method_for

    a = res.analysis
    note = method_for(res.level).orbitals_note(res.level)
    lines = [
        f"{res.species.label}  {res.level.text}  multiplicity {res.multiplicity}  r = {res.point.r_angstrom:.4f} A"
        f"  E = {res.point.energy_hartree:.8f} Eh  ({res.branch_choice})",
        *([f"  {note}"] if note else []),
        f"  {'spin':5s} {'label':10s} {'energy/Eh':>10s} {'occ':>4s}  {'formal class':13s} {'overlap pop.':>12s}"
        f" {'(character)':13s} {'valence name':14s} main AO components",
    ]
    natural = a.natural is not None
    occ_fmt = "6.3f" if natural else "4.0f"
    if natural:
        lines[-1] = lines[-1].replace(f"{'occ':>4s}", f"{'occ':>6s}")
    for m in a.orbitals:
        if m.occupation == 0 and m.energy_hartree > max(x.energy_hartree for x in a.orbitals if x.occupation > 0) + 1.0:
            continue
        lines.append(
            f"  {m.spin:5s} {m.label or 'mixed':10s} {m.energy_hartree:10.4f} {m.occupation:{occ_fmt}}  {m.formal_class[:13]:13s}"
            f" {m.overlap_population:12.4f} {('(' + m.overlap_character + ')'):13s} {m.valence_name or '':14s} {m.main_components()}"
        )
    bo = a.bond_orders()
    mo = "undefined" if bo["mo_count"] is None else f"{bo['mo_count']:.1f}"
    if natural:
        n = a.natural
        eff = "undefined" if n["effective_bond_order"] is None else f"{n['effective_bond_order']:.3f}"
        lines.append(f"  state {n['state']} in {n['active_space']} ({n['core_orbitals']} core orbitals)"
                     + (f", averaged over {n['averaged']}" if n["averaged"] else "")
                     + f"; leading configuration weight {n['leading_configuration_weight']:.3f}")
        lines.append(f"  effective bond order (bonding minus antibonding natural occupations, over two): {eff}")
        mo = eff
    lines += [
        f"  bond order: MO counting {mo};  Mayer {bo['mayer']:.3f};  Mulliken overlap population {bo['mulliken']:.3f} e;"
        f"  counting by overlap-population character {bo['overlap_character_count']:.1f}",
        "    (formal class and overlap-population character are both reported: s-p mixing can leave a formally"
        " bonding MO nearly nonbonding by overlap population)",
    ]
    if bo["mo_count_note"]:
        lines.append(f"    note: {bo['mo_count_note']}")
    lines.append(
        f"  spin: {a.unpaired_electrons} unpaired electron(s), {a.magnetism}; <S^2> = {a.s2:.4f}"
        f" (exact {a.s2_exact:.4f}, deviation {a.s2 - a.s2_exact:+.4f})"
        + (f"; unpaired in {', '.join(a.unpaired_orbitals)}" if a.unpaired_orbitals else "")
    )
    if res.candidates:
        lines.append("  multiplicities tried: " + ", ".join(f"{t.multiplicity}: {t.energy_hartree:.6f} Eh" for t in res.candidates))
    for name, e in res.other_branches.items():
        lines.append(f"  other solution here: {name} {e:.8f} Eh")
    ov = {k: v for k, v in a.overlaps.items() if k != "functions"}
    lines.append("  overlap integrals (p lobes towards the partner): " + ", ".join(f"{k} {v:.4f}" for k, v in ov.items()))
    return lines


def run(args) -> int:
    from ..export import ORBITAL_WRITERS
    from ..export.curve_files import write_outputs
    from ..single_point import orbitals
    from .curve import default_out_dir

    r = None if args.at_minimum else _distance(args.r)
    species, level, grid = resolve_args(args)
    out = check_outputs(args, args.out or default_out_dir(species, level) + "_orbitals")
    progress = Progress(not args.quiet, f"{species.label} {level.text}")
    try:
        with open_store(args) as store:
            res = orbitals(species, level, r, at_minimum=args.at_minimum, branch=args.branch,
                           multiplicity=args.multiplicity, grid=grid, store=store, progress=progress,
                           workers=args.workers)
    finally:
        progress.close()
    paths = write_outputs(res, out, ORBITAL_WRITERS)
    if not args.no_plots:
        from ..plots import ORBITAL_FIGURES, save_figures

        paths += save_figures(ORBITAL_FIGURES, res, out)
    for line in table_lines(res):
        print(line)
    print(f"  wrote: {', '.join(paths)}")
    return 0
