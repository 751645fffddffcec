"""Survey scale: many objects on Dask distributed, one large fit over MPI ranks.

* :func:`run_survey` (``retrieve batch``): every catalogue object is one Dask
  task writing a ``retrieve fit`` run folder; re-runs skip finished objects
  and resume interrupted ones (:mod:`retrieve.survey.batch`).
* :func:`read_catalogue`: the survey catalogue (:mod:`retrieve.survey.catalogue`).
* :class:`MPIPool`, :func:`mpi_fit`: walker evaluations over MPI ranks
  (``mpiexec -n K retrieve fit ... --mpi``; :mod:`retrieve.survey.mpi_pool`).

Dask and mpi4py are imported only when used.
"""
from .batch import SurveyResult, run_object, run_survey
from .catalogue import CatalogueEntry, object_config, read_catalogue
from .mpi_pool import MPIPool, mpi_fit

__all__ = ["run_survey", "run_object", "SurveyResult", "read_catalogue", "object_config", "CatalogueEntry",
           "MPIPool", "mpi_fit"]
