"""``lcao series`` and ``lcao run``: members side by side, from the command line or a study file."""

from __future__ import annotations

import argparse
import math
import os
import re
import sys

from .curve import (
    Progress,
    add_grid_options,
    add_level_modifiers,
    add_store_options,
    resolve_grid,
    resolve_level,
)

HELP = "curves, fits and orbitals of several species and/or levels side by side, with handbook values"
DESCRIPTION = (
    "Run a curve with fit and orbital analysis for every species at every level (an isoelectronic series, a"
    " ladder of levels, or both) and write series.csv, series.json and the comparison plots. Members that fail"
    " appear in the table with the reason."
)
RUN_HELP = "run a study file (TOML): species, levels, grids and outputs of a whole piece of work"


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("species", nargs="*", help="formulas (N2 CO CN- NO+ BF); or use --electrons")
    p.add_argument("--level", action="append", help="METHOD/BASIS; repeat for a ladder (default HF/6-31G)")
    add_level_modifiers(p)
    rule = p.add_argument_group("members by rule")
    rule.add_argument("--electrons", metavar="N", type=int, help="every diatomic of the element pool with N electrons")
    rule.add_argument("--elements", metavar="LIST",
                      help="element pool, comma-separated or as ranges (B,C,N,O,F or H-Ar); without --electrons every"
                           " diatomic of the pool, homonuclear and heteronuclear, with every charge of --charges")
    rule.add_argument("--charges", metavar="LO..HI", default="0..0", help="charge range, e.g. -2..2 (default 0..0)")
    add_grid_options(p)
    add_store_options(p)
    p.add_argument("--out", metavar="DIR", default="lcao-results/series", help="output folder (default lcao-results/series)")
    p.add_argument("--no-plots", action="store_true", help="skip the figures")
    add_workers_option(p)


def add_workers_option(p) -> None:
    p.add_argument("--workers", type=int, metavar="N",
                   help="worker processes for the members' curves (default: the CPU count; 1 runs everything in"
                        " this process)")
    p.add_argument("--cluster", metavar="WHERE",
                   help="run the tasks on a Dask cluster: local:N (N worker processes here) or tcp://HOST:PORT (an"
                        " existing scheduler); needs pip install 'lcao[cluster]'. The results store stays with"
                        " this process")


def _members_run(members, store_path, args, progress, cluster=None):
    """Run the members on one executor (a Dask cluster with --cluster or a study's [cluster] table); only
    this process writes the store."""
    from ..errors import InputError
    from ..series import run_series
    from ..store import Store

    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers must be at least 1, got {args.workers}")
    spec = args.cluster or cluster
    with Store(store_path, reuse=not args.recompute) as store:
        if spec is None:
            return run_series(members, store, workers=args.workers, progress=progress, member_files=True)
        from ..execute.dask import DaskExecutor

        with DaskExecutor(spec) as executor:
            return run_series(members, store, progress=progress, executor=executor, member_files=True)


def add_run_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("study", help="study file (TOML); see the README for an annotated example")
    p.add_argument("--store", metavar="FILE", help="override the study's results store")
    p.add_argument("--recompute", action="store_true", help="ignore stored points: compute afresh and replace them")
    p.add_argument("--no-plots", action="store_true", help="skip the figures")
    add_workers_option(p)


def add_script_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("study", help="study file (TOML) with a [cluster] table")


def cluster_script(args) -> int:
    """Print the batch job script the study's [cluster] table would submit (nothing is submitted)."""
    from ..errors import InputError
    from ..execute.dask import jobqueue_cluster
    from ..study import load_study

    study = load_study(args.study)
    if study.cluster is None:
        raise InputError(f"{args.study} has no [cluster] table")
    cluster = jobqueue_cluster(study.cluster)
    try:
        print(cluster.job_script())
    finally:
        cluster.close()
    print(f"# {study.cluster.get('jobs', 1)} such job(s) would be submitted by lcao run {args.study}")
    return 0


def write_series(rows, out: str, title: str, plots: bool) -> tuple[list[str], list[str]]:
    """Write the group's files; returns the paths and the members left out of the kinetics files."""
    from ..export.io import atomic_write_bytes, ensure_dir
    from ..export.series_files import SERIES_WRITERS
    from ..export.series_kinetics import series_kinetics

    rendered = {name: fn(rows, title) for name, fn in SERIES_WRITERS.items()}
    kinetics, left_out = series_kinetics(rows, title)
    rendered.update(kinetics)
    from ..series import member_folder

    for r in rows:
        for name, data in r.files.items():
            rendered[f"{member_folder(r.species, r.level)}/{name}"] = data
    ensure_dir(out)
    paths = []
    for name, data in rendered.items():
        path = os.path.join(out, name)
        ensure_dir(os.path.dirname(path))
        atomic_write_bytes(path, data)
        folder = os.path.join(out, name.split("/")[0]) + os.sep if "/" in name else path
        if folder not in paths:
            paths.append(folder)
    if plots and any(r.status == "ok" for r in rows):
        from ..plots import save_figure
        from ..plots.series_plot import SERIES_FIGURES

        for stem, fn in SERIES_FIGURES.items():
            ax = fn(rows)
            ax.set_title(title, fontsize=9)
            paths += save_figure(ax, os.path.join(out, stem))
    return paths, left_out


def table_lines(rows) -> list[str]:
    """The table printed on stdout (computed, handbook and signed error side by side)."""
    from ..export.series_files import member_values, signed_errors

    head = (
        f"{'species':8s} {'level':14s} {'mult':>4s} {'r_e/A':>8s} {'hb r_e':>7s} {'err':>7s} {'w_e/cm-1':>9s} {'hb w_e':>7s}"
        f" {'D_e/eV':>7s} {'D_0/eV':>7s} {'hb D_0':>7s} {'BO(MO)':>6s} {'Mayer':>6s} {'unp':>3s}  {'magnetism':12s} verdict / reason"
    )
    lines = [head]

    def num(v, fmt):
        width = int("".join(ch for ch in fmt.split(".")[0] if ch.isdigit()) or 0)
        if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v):
            return format(v, fmt)
        return "-".rjust(width)

    for r in rows:
        if r.status != "ok":
            lines.append(f"{r.species:8s} {r.level:14s} {'':>4s} {r.status + ': ' + (r.reason or ''):s}")
            continue
        v, h = member_values(r), r.handbook
        e = signed_errors(r, v)
        lines.append(
            f"{r.species:8s} {r.level:14s} {v.get('multiplicity', ''):>4} {num(v.get('re_angstrom'), '8.4f')} {num(h.get('re_angstrom'), '7.4f')}"
            f" {num(e.get('re_angstrom'), '+7.4f')} {num(v.get('we_cm1'), '9.1f')} {num(h.get('we_cm1'), '7.1f')}"
            f" {num(v.get('de_ev'), '7.3f'):>7s} {num(v.get('d0_ev'), '7.3f')} {num(h.get('d0_ev'), '7.3f')}"
            f" {num(v.get('bond_order_mo_count'), '6.1f')} {num(v.get('bond_order_mayer'), '6.3f')} {v.get('unpaired_electrons', '-'):>3}"
            f"  {v.get('magnetism') or '-':12s} {v.get('verdict') or '-'}"
            + (f" ({'symmetry-adapted' if r.branch == 'symmetric' else 'broken-symmetry'} branch: the lowest solution"
               " breaks the spatial symmetry in the well)" if r.spatial_in_well else "")
        )
    return lines


def _report(rows, title, written) -> int:
    paths, left_out = written
    print(title)
    for line in table_lines(rows):
        print("  " + line)
    failed = [r for r in rows if r.status == "failed"]
    print("  (hb = handbook: Huber & Herzberg 1979 / NIST WebBook as shipped; err = computed - handbook)")
    from ..export.series_files import levels_of
    from ..pipeline import caution_for

    for text in dict.fromkeys(caution_for(lv) for lv in levels_of(rows)):
        print(f"  caution: {text}")
    for line in left_out:
        print(f"  not in the kinetics files: {line}")
    print(f"  wrote: {', '.join(paths)}")
    return 1 if failed else 0


def _member_level(args, text):
    """A ladder's level: the active space goes to the active-space levels only."""
    from ..levels import parse_level
    from ..methods import method_for

    lv = parse_level(text, None if args.d_shells is None else args.d_shells == "cartesian",
                     False if args.all_electron else None)
    return resolve_level(args, text) if getattr(method_for(lv), "takes_active_space", False) else \
        resolve_level(args, text, well=True)


def run(args) -> int:
    from ..errors import InputError
    from ..export.io import check_out_dir
    from ..series import by_electron_count, every_pair, members_from, parse_charge_range, parse_elements
    from ..species import parse_species

    _check_cluster(args)
    levels = [_member_level(args, t) for t in (args.level or ["HF/6-31G"])]
    if args.active_space is not None and all(lv.active_space is None for lv in levels):
        raise InputError("--active-space applies to CASSCF and NEVPT2, and no level is one of them")
    well = resolve_level(args, args.well_level, well=True) if args.well_level else None
    if args.electrons is not None:
        if args.species:
            raise InputError("give species or --electrons, not both")
        if not args.elements:
            raise InputError("--electrons needs --elements, e.g. --elements B,C,N,O,F")
        species = by_electron_count(args.electrons, parse_elements(args.elements), parse_charge_range(args.charges))
    elif args.elements:  # a survey by rule: every diatomic of the pool with every charge of the range
        if args.species:
            raise InputError("give species or --elements, not both")
        species = every_pair(parse_elements(args.elements), parse_charge_range(args.charges))
    elif args.species:
        species = [parse_species(t) for t in args.species]
    else:
        raise InputError("name the species (e.g. N2 CO CN- NO+ BF) or give --electrons with --elements")
    options = dict(counterpoise=args.counterpoise, branch=args.branch)
    if args.r_from is not None and args.r_to is not None:  # one range for every member
        members = members_from(species, levels, resolve_grid(args, species[0]), None, None, well, **options)
    else:  # each member's own default grid (its end or start moved by --to or --from)
        members = []
        for sp in species:
            grid = resolve_grid(args, sp)
            members += members_from([sp], levels, grid, None, None, well, **options)
    from ..store import check_store_path

    out = check_out_dir(args.out)
    check_store_path(args.store)
    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers must be at least 1, got {args.workers}")
    progress = Progress(not args.quiet, "series")
    try:
        rows = _members_run(members, args.store, args, progress)
    finally:
        progress.close()
    title = "series: " + ", ".join(dict.fromkeys(m.species.label for m in members)) + " at " + ", ".join(lv.text for lv in levels)
    written = write_series(rows, out, title, not args.no_plots)
    from .report import write_page

    written[0].append(write_page(out, title))
    return _report(rows, title, written)


def _check_cluster(args) -> None:
    if args.cluster is not None:
        from ..execute.dask import parse_cluster

        parse_cluster(args.cluster)
        if args.workers is not None:
            from ..errors import InputError

            raise InputError("give --workers or --cluster, not both (a cluster's workers are its own)")


def _slug(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "-", name).strip("-") or "group"


def _study_index(study, out, outs, path) -> None:
    """The study file itself and the groups' order, for the report (written as each group is done)."""
    import json

    from ..export.io import atomic_write_bytes

    with open(path, "rb") as fh:
        atomic_write_bytes(os.path.join(out, "study.toml"), fh.read())
    index = [{"name": g.name, "folder": os.path.relpath(outs[g.name], out)} for g in study.groups]
    atomic_write_bytes(os.path.join(out, "groups.json"), json.dumps(index, indent=1).encode())


def run_study(args) -> int:
    from ..errors import InputError
    from ..export.io import check_out_dir
    from ..store import check_store_path
    from ..study import load_study

    _check_cluster(args)
    study = load_study(args.study)
    store_path = args.store or study.store
    out = check_out_dir(study.out)
    if not os.path.exists(store_path) and not os.path.isdir(os.path.dirname(os.path.abspath(store_path))):
        check_out_dir(os.path.dirname(os.path.abspath(store_path)))  # the store's folder will be made
    else:
        check_store_path(store_path)
    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers must be at least 1, got {args.workers}")
    status = 0
    outs = {g.name: os.path.join(out, _slug(g.name)) for g in study.groups}
    progress = Progress(not args.quiet, "study")
    try:
        os.makedirs(os.path.dirname(os.path.abspath(store_path)), exist_ok=True)
        for g in study.groups:  # each group's outputs are written as soon as it is done
            rows = _members_run(g.members, store_path, args, progress, study.cluster)
            title = f"{study.title}: {g.name}" if study.title else g.name
            status = max(status, _report(rows, title, write_series(rows, outs[g.name], title, not args.no_plots)))
            print()
            _study_index(study, out, outs, args.study)
    finally:
        progress.close()
    from .report import write_page

    print(f"  report: {write_page(out)}")
    print(f"study {study.path}: results in {out}, store {store_path}", file=sys.stdout)
    return status
