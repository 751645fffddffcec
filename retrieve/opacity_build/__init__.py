"""Opacity *building* (offline, may be slow): line lists and CIA files to opacity tables.

Pipeline::

    readers (hitran.py, exomol.py, cia.py)  ->  LineList chunks (linelist.py)
        -> line strengths S(T) and Voigt widths (linelist.py, profiles.py)
        -> fine-grid cross sections by the discrete integral transform (dit.py)
        -> reduction to constant-R bins: averaged/sampled cross sections or
           correlated-k coefficients (reduce.py)
        -> OpacityTable with provenance (build.py, provenance.py)
        -> retrieve.opacity.table.write_table

The forward model never imports this package; the two meet only through the
table format in :mod:`retrieve.opacity.table`.
"""
