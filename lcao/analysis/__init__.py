"""The post-processor: orbital characters, bond orders, spin and overlap integrals of a computed point."""

from .orbitals import MOInfo, OrbitalAnalysis, analyse

__all__ = ["MOInfo", "OrbitalAnalysis", "analyse"]
