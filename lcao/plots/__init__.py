"""Figures. Each ``plot_x(result, ax=None) -> Axes``; nothing here calls ``plt.show()``.

``CURVE_FIGURES`` maps a file stem to a plot function of a curve result.
"""

from .curve_plot import plot_curve, save_figure

CURVE_FIGURES = {"curve": plot_curve}

__all__ = ["CURVE_FIGURES", "plot_curve", "save_figure"]
