"""Benchmarks: the tool against the hand-written PySCF loop, measured in the same run (see __main__)."""
