"""``lcao report``: rebuild report.html from a results folder, without computing or opening the store."""

from __future__ import annotations

import argparse

HELP = "rebuild report.html (one self-contained page) from a results folder"
DESCRIPTION = (
    "Rebuild report.html in RESULTS_DIR from the outputs on disk (a study's, series', curve's or sheet's folder):"
    " the cautions, the summary table per group with handbook values and the verdicts, per member the curve,"
    " fit, vibrational levels, orbital levels and notes, the kinetics files and the provenance. Figures are"
    " inline SVG and nothing is fetched from the network. Nothing is computed and the store is not opened."
)


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("results", metavar="RESULTS_DIR", help="folder written by lcao run, series, curve or sheet")
    p.add_argument("--title", help="page title (default: the study's title, or the folder's name)")


def write_page(folder: str, title: str | None = None) -> str:
    """Write report.html into ``folder`` (used by the other commands); prints what is missing."""
    from ..export.html_report import write_report

    path, missing = write_report(folder, title)
    for m in missing:
        print(f"  report: missing {m}")
    return path


def run(args) -> int:
    path = write_page(args.results, args.title)
    print(f"wrote: {path}")
    return 0
