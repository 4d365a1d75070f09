"""Figures. Each ``plot_x(result, ax=None) -> Axes``; nothing here calls ``plt.show()``.

``CURVE_FIGURES`` and ``ORBITAL_FIGURES`` map a file stem to a plot function.
"""

from .curve_plot import plot_curve, save_figure, save_figures
from .levels_plot import plot_bond_orders, plot_levels

CURVE_FIGURES = {"curve": plot_curve, "bond-orders": plot_bond_orders}
ORBITAL_FIGURES = {"orbital-levels": plot_levels}

__all__ = ["CURVE_FIGURES", "ORBITAL_FIGURES", "plot_bond_orders", "plot_curve", "plot_levels", "save_figure", "save_figures"]
