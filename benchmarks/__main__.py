"""``python -m benchmarks``: wall time, per-point time, ratio against a baseline in the same run, peak memory.

Cases (each measured against its baseline in the same run):
  curve    a 40-point N2 and NO curve (0.8-3.0 A) at HF/STO-3G and HF/6-31G: the hand-written loop (a new
           molecule and a default SCF at every distance, energies only) against ``lcao.curve`` with the full
           protocol (sweeps, stability checks, refinement, orbital analysis along the curve, fit);
  series   a 6-species HF/6-31G series (N2, CO, BF, NO+, CN-, O2; 40-point default grids) on one worker
           against two workers, and a rerun from the store against the first run;
  shell    the same series as a user sees it, whole processes from the shell: a hand-written script that
           loops over the same species and distances (each member's default grid) computing energies
           only, against ``lcao series``;
  correlated  a 30-point CCSD(T)/cc-pVDZ curve of N2 against a hand loop (RHF and CCSD(T) with PySCF's
           defaults at each distance); the well-level ladder of N2 (B3LYP/cc-pVDZ curve, CCSD(T)/cc-pVTZ
           well and atoms), timed; the peak memory of one CCSD(T)/cc-pVQZ point;
  multireference  a 30-point NEVPT2/cc-pVDZ curve of N2 (the whole protocol: probes skipped by the given
           multiplicity, both halves of the sweep, refinement, atoms, analysis) against a hand loop
           (CASSCF(10,8) from the previous distance's orbitals and NEVPT2 at each distance);
  cluster  a 24-species HF/6-31G survey (every neutral diatomic of H, Li, B, C, N, O, F less the heaviest
           pairs, and their default grids) on a Dask local cluster of 2 workers against 1 worker, and
           against the local process pool on 2 workers; the per-task overhead of the engine in ms (an
           empty task, round trip through the scheduler);
  slow     (with --slow) a 40-point N2 curve at HF/cc-pVTZ.
Curve, series and shell cases take the best of ``--repeat`` runs of each side, the sides run in turn, and
every tool run starts with the process caches cleared (``lcao.clear_caches``; each run starts its own
worker processes). Both sides run on one thread per process.
Peak memory is the largest resident set of the process or of its worker processes (or of a child
process and its workers for the shell case).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np

CURVES = [("N2", "HF/STO-3G", 1), ("N2", "HF/6-31G", 1), ("NO", "HF/STO-3G", 2), ("NO", "HF/6-31G", 2)]
SERIES = ["N2", "CO", "BF", "NO+", "CN-", "O2"]
ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

HAND_SCRIPT = """
from pyscf import gto, scf
species = {"N2": ("N", "N", 0, 0), "CO": ("C", "O", 0, 0), "BF": ("B", "F", 0, 0),
           "NO+": ("N", "O", 1, 0), "CN-": ("C", "N", -1, 0), "O2": ("O", "O", 0, 2)}
distances = %(distances)r
for name, (a, b, q, s) in species.items():
    for r in distances[name]:
        mol = gto.M(atom=f"{a} 0 0 0; {b} 0 0 {r}", basis="6-31g", charge=q, spin=s, verbose=0)
        (scf.RHF(mol) if s == 0 else scf.UHF(mol)).kernel()
"""


def series_distances(points: int = 40) -> dict:
    """Angstrom distances of each series member's default grid: the hand script loops over the
    distances ``lcao series`` computes."""
    from lcao.scan.grid import default_grid
    from lcao.species import parse_species
    from lcao.units import bohr_to_angstrom

    return {name: [round(float(bohr_to_angstrom(r)), 10) for r in default_grid(*parse_species(name).z, points=points).r_bohr]
            for name in SERIES}


def baseline(species, level, mult, r):
    from pyscf import gto, scf

    from lcao.species import parse_species

    sp = parse_species(species)
    basis = level.split("/")[1]
    for x in r:
        mol = gto.M(atom=f"{sp.atoms[0]} 0 0 0; {sp.atoms[1]} 0 0 {x}", basis=basis, spin=mult - 1, verbose=0)
        (scf.RHF(mol) if mult == 1 else scf.UHF(mol)).kernel()


def tool(species, level, mult, r):
    import lcao
    from lcao.methods.cache import clear_caches
    from lcao.scan.grid import Grid
    from lcao.units import angstrom_to_bohr

    clear_caches()  # every case starts cold: no integrals, molecules or atoms from an earlier case
    grid = Grid(tuple(float(angstrom_to_bohr(x)) for x in r), "benchmark")
    return lcao.curve(species, level, grid, multiplicity=mult)


def peak_mb():
    """The largest resident set of this process or of any worker process it has waited for, MB."""
    return max(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
               resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss) / 1024.0


def child_peak_mb():
    return resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0


def timed(fn, *a):
    t0 = time.perf_counter()
    out = fn(*a)
    return time.perf_counter() - t0, out


def best_in_turn(repeat, fns, *a):
    """Shortest wall time of each of ``fns`` over ``repeat`` rounds, the functions run in turn within a
    round (the usual estimate on a machine with noisy neighbours; in turn, so that a slow spell of the
    machine falls on both sides rather than on whichever ran then)."""
    best = [None] * len(fns)
    for _ in range(max(1, repeat)):
        for j, fn in enumerate(fns):
            t, _ = timed(fn, *a)
            best[j] = t if best[j] is None else min(best[j], t)
    return best


def row(case, base_label, tb, tool_label, tt, points, mem):
    rec = {
        "case": case,
        "baseline": base_label,
        "baseline_s": tb,
        "tool": tool_label,
        "tool_s": tt,
        "points": points,
        "baseline_ms_per_point": 1000 * tb / points if points else None,
        "tool_ms_per_point": 1000 * tt / points if points else None,
        "ratio_tool_over_baseline": tt / tb,
        "peak_rss_mb": mem,
    }
    per = f" ({rec['tool_ms_per_point']:6.1f} vs {rec['baseline_ms_per_point']:6.1f} ms/pt)" if points else ""
    print(f"{case:34s} {tool_label:>18s} {tt:7.2f} s  {base_label:>18s} {tb:7.2f} s  ratio {tt / tb:5.2f}{per}  peak {mem:5.0f} MB")
    return rec


def run_series_case(rows, tmp, repeat: int = 1):
    """One worker (everything in this process) against two (a local pool), each ``repeat`` times in
    turn with new stores (the shortest counts), then a rerun of the last two-worker run from its store."""
    from lcao.levels import parse_level
    from lcao.methods.cache import clear_caches
    from lcao.series import members_from, run_series
    from lcao.store import Store

    members = members_from(SERIES, [parse_level("HF/6-31G")], points=40)

    def series(path, workers):
        with Store(path) as st:
            return run_series(members, st, workers=workers)

    one, two = [], []
    for k in range(max(1, repeat)):
        clear_caches()
        one.append(timed(series, os.path.join(tmp, f"one-{k}.sqlite"), 1)[0])
        clear_caches()
        path = os.path.join(tmp, f"two-{k}.sqlite")
        two.append(timed(series, path, 2)[0])
    t1, t2 = min(one), min(two)
    rows.append(row("series 6 x HF/6-31G, 2 workers", "1 worker", t1, "2 workers", t2, 0, peak_mb()))
    t3, _ = timed(series, path, 2)
    rows.append(row("series rerun from the store", "first run", two[-1], "rerun", t3, 0, peak_mb()))


def survey_members():
    """24 neutral diatomics of H, Li, B, C, N, O, F at HF/6-31G (the 28 pairs less the four heaviest)."""
    from lcao.levels import parse_level
    from lcao.series import every_pair, members_from

    species = every_pair(["H", "Li", "B", "C", "N", "O", "F"], (0, 0))[:24]
    return members_from(species, [parse_level("HF/6-31G")])


def run_cluster_case(rows, tmp, repeat: int = 1):
    """The survey on a Dask local cluster (1 and 2 workers) and on the local pool (2 workers), in turn,
    each with a new store; then the engine's round trip for an empty task."""
    from lcao.execute.dask import DaskExecutor
    from lcao.methods.cache import clear_caches
    from lcao.series import run_series
    from lcao.store import Store

    members = survey_members()
    runs = {"dask1": [], "dask2": [], "pool2": []}
    for k in range(max(1, repeat)):
        for name in runs:
            clear_caches()
            path = os.path.join(tmp, f"{name}-{k}.sqlite")
            t0 = time.perf_counter()
            with Store(path) as st:
                if name == "pool2":
                    run_series(members, st, workers=2)
                else:
                    with DaskExecutor(f"local:{name[-1]}") as ex:
                        run_series(members, st, executor=ex)
            runs[name].append(time.perf_counter() - t0)
    d1, d2, p2 = (min(runs[n]) for n in ("dask1", "dask2", "pool2"))
    rows.append(row("survey 24 x HF/6-31G on Dask", "1 Dask worker", d1, "2 Dask workers", d2, 0, peak_mb()))
    rows.append(row("survey 24 x HF/6-31G, 2 workers", "local pool", p2, "Dask local", d2, 0, peak_mb()))
    with DaskExecutor("local:2") as ex:
        ex.submit(int).result()
        n = 200
        t0 = time.perf_counter()
        for f in [ex.submit(int) for _ in range(n)]:
            f.result()
        per_task = (time.perf_counter() - t0) / n
        t0 = time.perf_counter()
        for _ in range(20):
            ex.submit(int).result()
        round_trip = (time.perf_counter() - t0) / 20
    print(f"Dask per-task overhead: {1000 * per_task:.2f} ms a task in a batch of {n}, {1000 * round_trip:.1f} ms"
          " for one task's round trip")
    rows.append({"case": "Dask per-task overhead", "batch_ms_per_task": 1000 * per_task,
                 "round_trip_ms": 1000 * round_trip})


def run_shell_case(rows, tmp, repeat: int = 1):
    """Whole processes, both sides ``repeat`` times in turn (each tool run with a new store); the
    shortest of each counts, as for the curve cases."""
    env = dict(os.environ, OMP_NUM_THREADS="1", PYTHONPATH=ROOT)
    script = HAND_SCRIPT % {"distances": series_distances(40)}
    hand, tool = [], []
    for k in range(max(1, repeat)):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-c", script], check=True, env=env)
        hand.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "lcao", "series", *SERIES, "--level", "HF/6-31G", "--points", "40",
                        "--workers", "2", "--store", os.path.join(tmp, f"shell-{k}.sqlite"),
                        "--out", os.path.join(tmp, f"shell-{k}"), "-q", "--no-plots"],
                       check=True, env=env, stdout=subprocess.DEVNULL)
        tool.append(time.perf_counter() - t0)
    rows.append(row("shell: series of 6 at HF/6-31G", "hand script", min(hand), "lcao series", min(tool), 6 * 40,
                    child_peak_mb()))


CC_SCRIPT = """
import resource, sys, time
from pyscf import gto, scf, cc, lib
lib.num_threads(1)
mol = gto.M(atom="N 0 0 0; N 0 0 1.0977", basis="cc-pvqz", verbose=0)
t = time.perf_counter()
mf = scf.RHF(mol).run()
mycc = cc.CCSD(mf, frozen=2).run()
mycc.ccsd_t()
print(time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0)
"""


def cc_baseline(r):
    """The hand loop of a correlated curve: RHF and CCSD(T) with PySCF's defaults at each distance. Where
    PySCF's CCSD DIIS meets a singular matrix at a stretched distance (it raises with numpy 2.x), the loop
    goes on as a user's script with a try would: that point has no energy, and its time still counts."""
    import numpy as np
    from pyscf import cc, gto, scf

    for x in r:
        mol = gto.M(atom=f"N 0 0 0; N 0 0 {x}", basis="cc-pvdz", verbose=0)
        try:
            mycc = cc.CCSD(scf.RHF(mol).run()).run()
            mycc.ccsd_t()
        except np.linalg.LinAlgError:
            continue


def cc_tool(r):
    import lcao
    from lcao.methods.cache import clear_caches
    from lcao.scan.grid import Grid
    from lcao.units import angstrom_to_bohr

    clear_caches()
    return lcao.curve("N2", "CCSD(T)/cc-pVDZ", Grid(tuple(float(angstrom_to_bohr(x)) for x in r), "benchmark"),
                      multiplicity=1)


def run_correlated_case(rows):
    """A 30-point CCSD(T)/cc-pVDZ curve of N2 (its default grid) against the hand loop; the well-level ladder
    of N2 (B3LYP/cc-pVDZ curve, CCSD(T)/cc-pVTZ well and atoms) timed; the peak memory of one
    CCSD(T)/cc-pVQZ point, in a process of its own."""
    from lcao.scan.grid import default_grid
    from lcao.species import parse_species
    from lcao.units import bohr_to_angstrom

    r = [float(bohr_to_angstrom(x)) for x in default_grid(*parse_species("N2").z, points=30).r_bohr]
    tb, tt = best_in_turn(1, (cc_baseline, cc_tool), r)
    rows.append(row("curve N2 CCSD(T)/cc-pVDZ (30 points)", "hand loop", tb, "lcao.curve", tt, len(r), peak_mb()))

    import lcao
    from lcao.methods.cache import clear_caches

    clear_caches()
    t, res = timed(lambda: lcao.curve("N2", "B3LYP/cc-pVDZ", points=20, multiplicity=1, analyse_points=False,
                                      well_level="CCSD(T)/cc-pVTZ"))
    rec = {"case": "ladder N2 B3LYP/cc-pVDZ curve, CCSD(T)/cc-pVTZ well", "tool_s": t, "points": res.computed,
           "peak_rss_mb": peak_mb()}
    rows.append(rec)
    print(f"{rec['case']:58s} {t:7.1f} s for {res.computed} points  peak {rec['peak_rss_mb']:5.0f} MB")
    env = dict(os.environ, OMP_NUM_THREADS="1")
    out = subprocess.run([sys.executable, "-c", CC_SCRIPT], check=True, env=env, capture_output=True, text=True)
    seconds, mb = (float(x) for x in out.stdout.split())
    rec = {"case": "one CCSD(T)/cc-pVQZ point of N2 (frozen core)", "tool_s": seconds, "peak_rss_mb": mb}
    rows.append(rec)
    print(f"{rec['case']:58s} {seconds:7.1f} s  peak {mb:5.0f} MB")


def cas_baseline(r):
    """The hand loop of a multiconfigurational curve: CASSCF(10,8) on the full valence space (PySCF's AVAS at
    the first distance, then each distance from the previous one's orbitals) and NEVPT2 at each distance."""
    from pyscf import gto, mcscf, mrpt, scf
    from pyscf.mcscf import avas

    mo, prev = None, None
    for x in r:
        mol = gto.M(atom=f"N 0 0 0; N 0 0 {x}", basis="cc-pvdz", verbose=0)
        mf = scf.RHF(mol)
        mf.run()  # PySCF's own recipe projects into the RHF orbitals of the new geometry
        mc = mcscf.CASSCF(mf, 8, 10)
        mc.fix_spin_(ss=0)
        if mo is None:
            _, _, guess = avas.avas(mf, ["N 2s", "N 2p"], minao="minao", threshold=0.1, verbose=0)
        else:
            guess = mcscf.project_init_guess(mc, mo, prev)
        mc.kernel(guess)
        mrpt.NEVPT(mc).kernel()
        mo, prev = mc.mo_coeff, mol


def cas_tool(r):
    import lcao
    from lcao.methods.cache import clear_caches
    from lcao.scan.grid import Grid
    from lcao.units import angstrom_to_bohr

    clear_caches()
    return lcao.curve("N2", "NEVPT2/cc-pVDZ", Grid(tuple(float(angstrom_to_bohr(x)) for x in r), "benchmark"),
                      multiplicity=1)


def run_multireference_case(rows):
    """A 30-point NEVPT2/cc-pVDZ curve of N2 (its default grid), the whole protocol, against the hand loop."""
    from lcao.scan.grid import default_grid
    from lcao.species import parse_species
    from lcao.units import bohr_to_angstrom

    r = [float(bohr_to_angstrom(x)) for x in default_grid(*parse_species("N2").z, points=30).r_bohr]
    tb, tt = best_in_turn(1, (cas_baseline, cas_tool), r)
    rows.append(row("curve N2 NEVPT2/cc-pVDZ (30 points)", "hand loop", tb, "lcao.curve", tt, len(r), peak_mb()))


def main(argv=None):
    p = argparse.ArgumentParser(prog="python -m benchmarks", description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--points", type=int, default=40)
    p.add_argument("--cases", default="curve,series,shell,correlated,multireference,cluster",
                   help="comma-separated: curve, series, shell, correlated, multireference, cluster, slow")
    p.add_argument("--slow", action="store_true", help="also run the cc-pVTZ curve")
    p.add_argument("--repeat", type=int, default=3, help="runs of each curve, series and shell case; the shortest counts (default 3)")
    p.add_argument("--out", default=os.path.join(os.path.dirname(__file__), "results", "latest.json"))
    args = p.parse_args(argv)
    from pyscf import lib
    from threadpoolctl import threadpool_limits

    # one thread for the baseline and the tool alike (PySCF's OpenMP and the BLAS pools), as in the
    # issue's baseline; the tool would choose one thread for these bases by itself
    lib.num_threads(1)
    threadpool_limits(1)
    import warnings

    warnings.simplefilter("ignore")
    cases = set(args.cases.split(",")) | ({"slow"} if args.slow else set())
    r = np.linspace(0.8, 3.0, args.points)
    rows = []
    curves = list(CURVES) if "curve" in cases else []
    if "slow" in cases:
        curves.append(("N2", "HF/cc-pVTZ", 1))
    for species, level, mult in curves:
        k = 1 if "cc-" in level else args.repeat
        tb, tt = best_in_turn(k, (baseline, tool), species, level, mult, r)
        rows.append(row(f"curve {species} {level}", "hand loop", tb, "lcao.curve", tt, args.points, peak_mb()))
    with tempfile.TemporaryDirectory() as tmp:
        if "series" in cases:
            run_series_case(rows, tmp, args.repeat)
        if "shell" in cases:
            run_shell_case(rows, tmp, args.repeat)
        if "cluster" in cases:
            run_cluster_case(rows, tmp, 1 if args.repeat < 2 else 2)
    if "correlated" in cases:
        run_correlated_case(rows)
    if "multireference" in cases:
        run_multireference_case(rows)
    os.makedirs(os.path.dirname(args.out), exist_ok=True)
    with open(args.out, "w") as fh:
        json.dump({"python": sys.version, "cpu_count": os.cpu_count(), "cases": rows}, fh, indent=2)
    print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
