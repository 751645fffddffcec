"""Observations: spectra, photometry and their covariances, read with units at the edges."""
from .dataset import Dataset, ObjectData

__all__ = ["Dataset", "ObjectData"]
