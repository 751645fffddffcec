"""The model atmosphere: pressure levels, T–P profiles, free chemistry, hydrostatics.

Everything is defined at pressure *levels* (ascending, top of the atmosphere
first); optical depth is integrated between levels (see :mod:`.hydrostatics`).
"""
from .chemistry import Composition, FreeChemistry
from .hydrostatics import column_mass, gravity_cgs, layer_optical_depth
from .pressure import DEFAULT_N_LEVELS, DEFAULT_PRESSURE_RANGE_BAR, pressure_levels
from .profiles import PROFILES, TPProfile, build_profile

__all__ = [
    "Composition", "FreeChemistry", "column_mass", "gravity_cgs", "layer_optical_depth",
    "DEFAULT_N_LEVELS", "DEFAULT_PRESSURE_RANGE_BAR", "pressure_levels",
    "PROFILES", "TPProfile", "build_profile",
]
