"""Figures, one module per figure, all headless (Agg) and in the house style of :mod:`.style`."""
from .abundance_plot import plot_abundances
from .band_diagram import plot_band_diagram
from .corner_plot import plot_corner
from .profile_plot import plot_profile
from .spectrum_plot import Envelope, plot_spectrum
from .style import save_figure

__all__ = ["plot_abundances", "plot_band_diagram", "plot_corner", "plot_profile", "plot_spectrum",
           "Envelope", "save_figure"]
