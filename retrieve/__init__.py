"""retrieve — atmospheric retrievals for low-resolution spectra of directly imaged companions.

Data flow (one sub-package per stage)::

    observations -> atmosphere -> opacity -> radiative_transfer -> instrument
                 -> inference (priors, likelihood, sampler) -> analysis -> plotting / report
"""
from importlib.metadata import PackageNotFoundError, version as _version

try:
    __version__ = _version("retrieve-atmo")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+unknown"

__all__ = ["__version__"]
