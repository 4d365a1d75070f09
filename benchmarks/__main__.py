"""``python -m benchmarks``: wall time, per-point time, tool/baseline ratio and peak memory.

Cases: a 40-point N2 curve (0.8-3.0 A) in HF/STO-3G and HF/6-31G, and a 40-point NO curve, each done by
(a) the loop a user writes by hand (a new molecule and a default SCF at every distance, energies only) and
(b) ``lcao.curve`` with the full protocol (both sweeps, stability checks, fit) and an in-memory store.
Peak memory is the process's maximum resident set size after each case (it only grows).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import sys
import time

import numpy as np

CASES = [("N2", "HF/STO-3G", 1), ("N2", "HF/6-31G", 1), ("NO", "HF/STO-3G", 2), ("NO", "HF/6-31G", 2)]


def baseline(species, level, mult, r):
    from pyscf import gto, scf

    from lcao.species import parse_species

    sp = parse_species(species)
    basis = level.split("/")[1]
    out = []
    for x in r:
        mol = gto.M(atom=f"{sp.atoms[0]} 0 0 0; {sp.atoms[1]} 0 0 {x}", basis=basis, spin=mult - 1, verbose=0)
        mf = scf.RHF(mol) if mult == 1 else scf.UHF(mol)
        out.append(mf.kernel())
    return out


def tool(species, level, mult, r):
    import lcao
    from lcao.scan.grid import Grid
    from lcao.units import angstrom_to_bohr

    grid = Grid(tuple(float(angstrom_to_bohr(x)) for x in r), "benchmark")
    return lcao.curve(species, level, grid, multiplicity=mult)


def peak_mb():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def main(argv=None):
    p = argparse.ArgumentParser(prog="python -m benchmarks")
    p.add_argument("--points", type=int, default=40)
    p.add_argument("--out", default=os.path.join(os.path.dirname(__file__), "results", "latest.json"))
    args = p.parse_args(argv)
    from pyscf import lib

    lib.num_threads(1)
    import warnings

    warnings.simplefilter("ignore")
    r = np.linspace(0.8, 3.0, args.points)
    rows = []
    for species, level, mult in CASES:
        t0 = time.perf_counter()
        baseline(species, level, mult, r)
        tb = time.perf_counter() - t0
        mb = peak_mb()
        t0 = time.perf_counter()
        tool(species, level, mult, r)
        tt = time.perf_counter() - t0
        rows.append(
            {
                "case": f"{species} {level} {args.points} points",
                "baseline_s": tb,
                "baseline_ms_per_point": 1000 * tb / args.points,
                "tool_s": tt,
                "tool_ms_per_point": 1000 * tt / args.points,
                "ratio_tool_over_baseline": tt / tb,
                "peak_rss_mb_after_baseline": mb,
                "peak_rss_mb_after_tool": peak_mb(),
            }
        )
        print(
            f"{rows[-1]['case']:28s} baseline {tb:6.2f} s ({rows[-1]['baseline_ms_per_point']:5.1f} ms/pt)"
            f"  tool {tt:6.2f} s ({rows[-1]['tool_ms_per_point']:5.1f} ms/pt)  ratio {tt / tb:5.2f}"
            f"  peak {peak_mb():6.0f} MB"
        )
    os.makedirs(os.path.dirname(args.out), exist_ok=True)
    with open(args.out, "w") as fh:
        json.dump({"python": sys.version, "threads": 1, "cases": rows}, fh, indent=2)
    print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
