"""Instrument model: sparse linear operators from the model grid to each dataset.

Build them once with :func:`dataset_operator`; the hot path is one sparse
matrix–vector product per dataset.
"""
from .grid import box_average_operator, model_bin_edges
from .lsf import gaussian_lsf_operator
from .operator import (channel_edges, dataset_operator, photometry_operator, required_wavelength_range,
                       spectrum_operator)

__all__ = ["model_bin_edges", "gaussian_lsf_operator", "box_average_operator", "channel_edges",
           "spectrum_operator", "photometry_operator", "dataset_operator", "required_wavelength_range"]
