"""Line lists and CIA from published molecular physics, and the driver for the bundled tables.

The tables in ``opacity_tables/`` are made by :func:`build_all` from the
generators in this package (one module per molecule; see each module's
docstring for method and the sources of its constants).  They are
approximations for demonstration and band identification at low
resolution; for science build tables from HITEMP or ExoMol with
``retrieve opacity build``.

Importing this package registers level-structure partition functions with
:mod:`retrieve.opacity_build.partition` (lazily: a generator module is
imported only when its Q(T) is first called).
"""
from __future__ import annotations

import importlib

from ..partition import register_partition_function
from .registry import (BUILD_DATE, CIA_PAIRS, GENERATORS, XSEC_SPECIES, build_all, bundled_grid,
                       table_filename)

__all__ = ["build_all", "bundled_grid", "table_filename", "GENERATORS", "XSEC_SPECIES", "CIA_PAIRS",
           "BUILD_DATE", "LazyPartition"]


class LazyPartition:
    """Q(T) of a generator module, imported on first call (picklable)."""

    def __init__(self, module: str, attr: str = "partition_function", **kwargs):
        self.module, self.attr, self.kwargs = module, attr, kwargs

    def __call__(self, temperature_K):
        func = getattr(importlib.import_module(f"{__name__}.{self.module}"), self.attr)
        return func(temperature_K, **self.kwargs)


def _register() -> None:
    for species, spec in GENERATORS.items():
        if spec.get("partition") is None:
            continue
        module, kwargs = spec["partition"]
        register_partition_function(species, LazyPartition(module, **kwargs))
    # CO isotopologues with HITRAN local ids (TIPS numbering)
    for iso, label in ((1, "12C16O"), (2, "13C16O"), (3, "12C18O")):
        register_partition_function(f"CO:{iso}", LazyPartition("co", label=label))


_register()
