"""Whether a change to the SCF path changed any number: every point of every sweep of twelve curves.

Speed work on the SCF (its eigensolver, DIIS, J/K, warm starts, parallel order) must leave the
numbers alone, and a difference in the last bit of one product can send a sweep at long range onto
another UHF solution. This records the energies of every sweep point, the final curve, the refined
points and the fitted bond length of N2, NO, O2, CO, CN- and BF in HF/STO-3G and HF/6-31G (40
points, 0.8-3.0 A), and compares two such records point by point::

    .venv/bin/python -m benchmarks.numbers record /tmp/before.json     # on the old code
    .venv/bin/python -m benchmarks.numbers record /tmp/after.json      # on the new code
    .venv/bin/python -m benchmarks.numbers compare /tmp/before.json /tmp/after.json

``compare`` prints, per curve, how many numbers differ and by how much at most (hartree), and exits
with status 1 where any differs by more than ``--tolerance`` (default 0: to the last bit). A sweep that
only the newer record has (a branch the newer code adds, such as a symmetry-adapted one) is listed as new
and does not fail the comparison. It takes
about 25 seconds on two cores.
"""

from __future__ import annotations

import argparse
import json
import sys

import numpy as np

CURVES = (("N2", 1), ("NO", 2), ("O2", 3), ("CO", 1), ("CN-", 1), ("BF", 1))
BASES = ("STO-3G", "6-31G")


def record(path: str, points: int = 40) -> dict:
    from benchmarks.__main__ import tool
    from lcao.units import bohr_to_angstrom

    r = np.linspace(0.8, 3.0, points)
    out = {}
    for species, mult in CURVES:
        for basis in BASES:
            res = tool(species, f"HF/{basis}", mult, r)
            out[f"{species} HF/{basis}"] = {
                "final_hartree": [p.energy_hartree if p.trusted else None for p in res.points],
                "branch": [p.branch for p in res.points],
                "sweeps_hartree": {k: [p.energy_hartree if p else None for p in v]
                                   for k, v in res.scan.sweeps.items()},
                "refined_hartree": [p.energy_hartree for p in res.refined],
                "re_angstrom": float(bohr_to_angstrom(res.fit.local.re)) if res.fit else None,
            }
    with open(path, "w") as fh:
        json.dump(out, fh, indent=1)
    return out


def _series(entry: dict) -> dict:
    got = {"final": entry["final_hartree"], "refined": entry["refined_hartree"],
           "re_angstrom": [entry["re_angstrom"]]}
    for name, values in entry["sweeps_hartree"].items():
        got[f"sweep {name}"] = values
    return got


def compare(a: dict, b: dict) -> list[tuple[str, int, float, list[str]]]:
    """Per curve: (name, numbers that differ, largest difference, notes on what else differs)."""
    rows = []
    for name in sorted(set(a) | set(b)):
        if name not in a or name not in b:
            rows.append((name, 0, float("inf"), ["only in one record"]))
            continue
        notes, differing, worst = [], 0, 0.0
        if a[name]["branch"] != b[name]["branch"]:
            notes.append("branches differ")
        sa, sb = _series(a[name]), _series(b[name])
        for key in sorted(set(sa) | set(sb)):
            xa, xb = sa.get(key), sb.get(key)
            if xa is None and xb is not None and key.startswith("sweep "):
                notes.append(f"new {key} (computed only by the newer code; not a change of the others)")
                continue
            if xa is None or xb is None or len(xa) != len(xb):
                notes.append(f"{key}: not in both or of other length")
                worst = float("inf")
                continue
            for x, y in zip(xa, xb):
                if x is None or y is None:
                    if (x is None) != (y is None):
                        differing += 1
                        worst = float("inf")
                    continue
                if x != y:
                    differing += 1
                    worst = max(worst, abs(x - y))
        rows.append((name, differing, worst, notes))
    return rows


def main(argv=None) -> int:
    p = argparse.ArgumentParser(prog="python -m benchmarks.numbers", description=__doc__,
                                formatter_class=argparse.RawDescriptionHelpFormatter)
    sub = p.add_subparsers(dest="action", required=True)
    rec = sub.add_parser("record", help="compute the twelve curves and write their numbers to a JSON file")
    rec.add_argument("path")
    cmp_ = sub.add_parser("compare", help="compare two records point by point")
    cmp_.add_argument("before")
    cmp_.add_argument("after")
    cmp_.add_argument("--tolerance", type=float, default=0.0, help="largest accepted difference, hartree (default 0)")
    args = p.parse_args(argv)
    if args.action == "record":
        record(args.path)
        print(f"wrote {args.path}")
        return 0
    with open(args.before) as fa, open(args.after) as fb:
        rows = compare(json.load(fa), json.load(fb))
    failed = False
    for name, differing, worst, notes in rows:
        bad = worst > args.tolerance or any(not n.startswith("new ") for n in notes)
        failed |= bad
        print(f"{name:16s} {differing:4d} differ, largest {worst:.2e} Eh"
              + (f"  ({'; '.join(notes)})" if notes else "") + ("  <-- beyond tolerance" if bad else ""))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
