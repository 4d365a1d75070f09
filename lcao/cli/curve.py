"""``lcao curve``: a potential-energy curve with the state-following protocol."""

from __future__ import annotations

import argparse
import os
import sys
import time

HELP = "scan the bond distance of a diatomic and write points.csv and curve.json"
DESCRIPTION = (
    "Scan the bond distance of a diatomic with the state-following protocol (two sweeps, rescue ladder,"
    " stability analysis), keep every point in the results store, and write points.csv and curve.json."
    " Distances are in angstrom, energies in hartree."
)

#: A run with more than this fraction of flagged points exits with status 1.
MAX_FLAGGED_FRACTION = 0.25
#: fewest grid points ``lcao curve`` accepts (the fits need five trusted points)
MIN_CURVE_POINTS = 5


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("species", help="formula with optional charge: N2, CO, HCl, NO+, CN-, C2^2-")
    add_level_options(p)
    add_grid_options(p)
    add_store_options(p)
    p.add_argument("--out", metavar="DIR", help="output folder (default: lcao-results/SPECIES_METHOD_BASIS)")
    p.add_argument("--isotopes", metavar="A,B", help="mass numbers for the fit, e.g. 13,16 or 2H,1H (default most abundant)")
    p.add_argument("--no-plots", action="store_true", help="skip curve.png and curve.svg")
    add_workers_option(p)


def add_level_options(p, well: bool = True) -> None:
    g = p.add_argument_group("level of theory and state")
    g.add_argument("--level", default="HF/6-31G",
                   help="METHOD/BASIS: HF, RHF, UHF, ROHF; MP2, CCSD, CCSD(T) (R/U prefix for one reference); a"
                        " density functional by name (B3LYP, PBE0, M06-2X, ...); CASSCF, NEVPT2 (full valence"
                        " active space); a basis-set extrapolation CBS(cc-pVTZ,cc-pVQZ) for the correlated ones"
                        " (default HF/6-31G)")
    add_level_modifiers(g, well)
    g.add_argument("--charge", type=_int_arg("--charge"), help="net charge (instead of a suffix such as NO+)")
    g.add_argument(
        "--multiplicity",
        type=_int_arg("--multiplicity"),
        help="2S+1; default: the lowest-energy candidate near equilibrium",
    )


def add_level_modifiers(g, well: bool = True) -> None:
    g.add_argument(
        "--d-shells",
        choices=("cartesian", "spherical"),
        help="override the basis set's d-shell convention (Pople 6-31G sets cartesian, others spherical)",
    )
    g.add_argument("--all-electron", action="store_true",
                   help="correlate every electron (MP2, CC; default: the atoms' noble-gas cores are frozen)")
    g.add_argument("--active-space", metavar="N_ELECTRONS,N_ORBITALS",
                   help="the active space of CASSCF and NEVPT2 (default: the full valence space of the two atoms,"
                        " e.g. 10,8 for N2); the chosen orbitals are listed in the output")
    if well:
        g.add_argument("--well-level", metavar="METHOD/BASIS",
                       help="a higher level for the points about the minimum and the separated atoms: r_e, the"
                            " vibrational and rotational constants and D_e come from it")
        g.add_argument("--counterpoise", action="store_true",
                       help="correct the curve for basis-set superposition (Boys & Bernardi 1970): each atom in the"
                            " dimer's basis at every distance; the fit and verdict use the corrected curve (turned"
                            " on by itself for rare-gas pairs and wells shallower than 0.05 eV)")
        g.add_argument("--branch", choices=("lowest", "symmetric"), default="lowest",
                       help="where the lowest solution breaks the molecule's spatial symmetry, follow it (lowest,"
                            " the default) or the symmetry-adapted solution reference tables list (symmetric);"
                            " both are fitted")


def add_grid_options(p) -> None:
    g = p.add_argument_group("distance grid (angstrom)")
    g.add_argument("--from", dest="r_from", metavar="R",
                   help="first distance, angstrom (alone: the default grid starts here instead)")
    g.add_argument("--to", dest="r_to", metavar="R",
                   help="last distance, angstrom (alone: the default grid extended, or cut, to end here)")
    g.add_argument("--points", metavar="N", help="number of distances (default 30)")


def add_workers_option(p) -> None:
    p.add_argument("--workers", type=_int_arg("--workers"), metavar="N",
                   help="worker processes for the independent sweeps of a curve (default: the CPU count; 1 computes"
                        " everything in this process)")


def apply_workers(args) -> None:
    """Check ``--workers``."""
    if args.workers is not None and args.workers < 1:
        from ..errors import InputError

        raise InputError(f"--workers must be at least 1, got {args.workers}")


def add_store_options(p) -> None:
    g = p.add_argument_group("results store")
    g.add_argument("--store", metavar="FILE", default="lcao-store.sqlite", help="SQLite results store (default ./lcao-store.sqlite)")
    g.add_argument("--recompute", action="store_true", help="ignore stored points: compute afresh and replace them")


def _int_arg(name):
    def conv(text):
        try:
            return int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{name} must be a whole number, got {text!r}") from None

    return conv


def resolve_level(args, text=None, well: bool = False):
    """The level of ``--level`` (or ``text``) with the d-shell, frozen-core and active-space options applied
    (the active space to an active-space method's level, never to the well level)."""
    from ..levels import parse_active_space, parse_level

    cart = None if args.d_shells is None else args.d_shells == "cartesian"
    space = getattr(args, "active_space", None)
    lv = parse_level(text or args.level, cart, False if args.all_electron else None)
    if space is None or well:
        return lv
    from ..methods import method_for

    if not getattr(method_for(lv), "takes_active_space", False):
        from ..errors import LevelError

        raise LevelError(f"--active-space applies to CASSCF and NEVPT2, not {lv.method}")
    return parse_level(text or args.level, cart, False if args.all_electron else None, parse_active_space(space))


def resolve_well_level(args):
    return resolve_level(args, args.well_level, well=True) if getattr(args, "well_level", None) else None


def whole_points(text) -> int:
    """``--points`` as a whole number, or a GridError naming it."""
    from ..errors import GridError

    try:
        return int(text)
    except (TypeError, ValueError):
        raise GridError(f"--points must be a whole number, got {text!r}") from None


def resolve_grid(args, species):
    from ..scan.grid import DEFAULT_POINTS, default_grid, range_grid

    given = [args.r_from is not None, args.r_to is not None]
    if all(given):
        return range_grid(args.r_from, args.r_to, args.points if args.points is not None else 30)
    if any(given) or args.points is not None:  # the default grid, its end (or start) moved
        n = whole_points(args.points) if args.points is not None else DEFAULT_POINTS
        return default_grid(*species.z, points=n, r_from=args.r_from, r_to=args.r_to)
    return None


def default_out_dir(species, level) -> str:
    basis = "".join(c if c.isalnum() else "-" for c in level.basis).strip("-")
    return os.path.join("lcao-results", f"{species.slug}_{level.method}_{basis}")


class Progress:
    """A tqdm bar on a terminal, nothing otherwise."""

    def __init__(self, enabled: bool, label: str):
        self.bar = None
        if enabled and sys.stderr.isatty():
            from tqdm import tqdm

            tqdm.monitor_interval = 0  # no monitor thread: worker processes are forked where no thread runs
            self.bar = tqdm(desc=label, unit="pt", file=sys.stderr, leave=False)
        self.expected = None  # points the run is expected to compute, when known
        self.levels: set = set()  # the levels whose cost is worth saying (not a cheap reference level)
        self.enabled = enabled
        self.said = set()

    def __call__(self, label, points):
        if self.bar is not None:
            self.bar.set_postfix_str(label, refresh=False)
            self.bar.update(points)

    def measured(self, level_text: str, seconds_per_point: float, workers: int) -> None:
        """The first measured cost of a point at a level: said once, with a rough estimate of the whole run."""
        if not self.enabled or level_text in self.said or (self.levels and level_text not in self.levels):
            return
        self.said.add(level_text)
        rest = ""
        if self.expected:
            rest = f"; about {_duration(seconds_per_point * self.expected / max(1, workers))} for the whole run (rough)"
        msg = f"lcao: {level_text}: about {seconds_per_point:.2g} s a point on one worker (measured){rest}"
        if self.bar is not None:
            self.bar.write(msg, file=sys.stderr)
        else:
            print(msg, file=sys.stderr)

    def start_members(self, total: int) -> None:
        """A survey: a second bar over its members (done, failed, left and the time still needed)."""
        self.members = {"total": total, "done": 0, "failed": 0, "skipped": 0, "t0": time.monotonic()}
        self.member_bar = None
        if self.bar is not None and total > 1:
            from tqdm import tqdm

            self.member_bar = tqdm(total=total, desc="members", unit="member", file=sys.stderr, leave=False,
                                   position=1)

    def member_done(self, species: str, level: str, status: str) -> None:
        m = getattr(self, "members", None)
        if m is None:
            return
        m["done"] += 1
        if status in ("failed", "skipped"):
            m[status] += 1
        left = m["total"] - m["done"]
        text = f"done {m['done']}, failed {m['failed']}, skipped {m['skipped']}, left {left}"
        if self.member_bar is not None:
            self.member_bar.set_postfix_str(text, refresh=False)
            self.member_bar.update(1)
        elif self.enabled and m["total"] > 1:
            rate = (time.monotonic() - m["t0"]) / m["done"]
            eta = f"; about {_duration(rate * left)} left" if left else ""
            print(f"lcao: {species} at {level}: {status} ({text}{eta})", file=sys.stderr)

    def close(self):
        if self.bar is not None:
            self.bar.close()
        if getattr(self, "member_bar", None) is not None:
            self.member_bar.close()


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def announce(progress, species, level, grid, multiplicity, workers, well=None) -> None:
    """Before a run: the basis size and what is about to be computed (stderr, unless quiet)."""
    from ..atoms import charge_placements
    from ..methods import method_for
    from ..pipeline import basis_size
    from ..scan.grid import default_grid
    from ..scan.plan import expected_points
    from ..threads import cores

    if not progress.enabled:
        return
    method = method_for(level)
    n = len(grid) if grid is not None else len(default_grid(*species.z))
    mult = multiplicity or method.fixed_multiplicity(level, species) or species.lowest_multiplicity()
    probes = 0 if (multiplicity or method.fixed_multiplicity(level, species)) else len(species.multiplicity_candidates())
    progress.expected = expected_points(n, method.state_plan(level, mult), len(charge_placements(species)), probes)
    for lv in (level, well):
        if lv is not None:
            progress.levels |= {lv.with_basis(b).text for b in lv.cbs[:2]} if lv.cbs else {lv.text}
    sizes = f"{basis_size(species, level)} basis functions at {level.text}"
    if well is not None:
        sizes += f", {basis_size(species, well)} at {well.text} (the well and atoms)"
    print(f"lcao: {species.label}: {sizes}; {n} grid points; {workers or cores()} worker process(es)", file=sys.stderr)


def open_store(args):
    from ..store import Store

    return Store(args.store, reuse=not args.recompute)


def check_outputs(args, out):
    """Check the output folder and the store before anything is computed or written."""
    from ..export.io import check_out_dir
    from ..store import check_store_path

    out = check_out_dir(out)
    check_store_path(args.store)
    return out


def resolve_args(args):
    """Species, level and grid of a curve-like command, checked (and the core cap applied)."""
    from ..pipeline import resolve_inputs
    from ..species import parse_species

    apply_workers(args)
    species = parse_species(args.species, args.charge)
    level = resolve_level(args)
    grid = resolve_grid(args, species)
    well = resolve_well_level(args)
    if well is not None:
        resolve_inputs(species, well, grid, args.multiplicity)  # refused here, before anything is written
    return resolve_inputs(species, level, grid, args.multiplicity)


def run(args) -> int:
    from ..export import write_outputs
    from ..pipeline import curve
    from ..report import summary_lines

    species, level, grid = resolve_args(args)
    if len(grid if grid is not None else ()) and len(grid) < MIN_CURVE_POINTS:
        from ..errors import GridError

        raise GridError(f"--points {len(grid)} is too few for a curve fit; give at least {MIN_CURVE_POINTS} (or use 'lcao orbitals' for one distance)")
    from ..masses import resolve_isotopes

    resolve_isotopes(species.atoms, args.isotopes)
    out = check_outputs(args, args.out or default_out_dir(species, level))
    progress = Progress(not args.quiet, f"{species.label} {level.text}")
    announce(progress, species, level, grid, args.multiplicity, args.workers, resolve_well_level(args))
    try:
        with open_store(args) as store:
            result = curve(species, level, grid, multiplicity=args.multiplicity, store=store, isotopes=args.isotopes,
                           progress=progress, workers=args.workers, well_level=resolve_well_level(args),
                           counterpoise=args.counterpoise, branch=args.branch)
    finally:
        progress.close()
    paths = write_outputs(result, out)
    if not args.no_plots:
        from ..plots import CURVE_FIGURES, save_figures

        paths += save_figures(CURVE_FIGURES, result, out)
    from .report import write_page

    paths.append(write_page(out))
    for line in summary_lines(result):
        print(line)
    print(f"  wrote: {', '.join(paths)}")
    n = len(result.points)
    flagged = n - len(result.trusted_points)
    status = 0
    if not result.trusted_points or flagged > MAX_FLAGGED_FRACTION * n:
        print(f"lcao: WARNING: {flagged} of {n} points are flagged, more than {MAX_FLAGGED_FRACTION:.0%};"
              " the curve and its fit are not to be trusted", file=sys.stderr)
        status = 1
    if result.fit is None and result.verdict is None:
        print(f"lcao: no fit: {result.fit_error}", file=sys.stderr)
        status = 1
    return status
