"""Observations: spectra, photometry and their covariances, read with units at the edges."""
from .dataset import Dataset, ObjectData
from .filters import filter_effective_wavelength, known_filter_names, load_filter
from .readers import read_dataset, read_object
from .writers import write_dataset

__all__ = ["Dataset", "ObjectData", "read_dataset", "read_object", "write_dataset",
           "load_filter", "filter_effective_wavelength", "known_filter_names"]
