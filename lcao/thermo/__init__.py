"""Partition functions, thermochemical tables and NASA polynomial fits."""

from .nasa import NasaFit, fit_nasa
from .statistical import MoleculeConstants, thermo_functions, thermo_table

__all__ = ["MoleculeConstants", "NasaFit", "fit_nasa", "thermo_functions", "thermo_table"]
