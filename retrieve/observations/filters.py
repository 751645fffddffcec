"""Photometric filter response curves, from the curves bundled with speclite.

speclite ships its filter curves as package data, so nothing is downloaded.
Names are speclite's ``<group>-<band>`` names, e.g. ``twomass-J``,
``twomass-H``, ``twomass-Ks``, ``wise2010-W1``.
"""
from __future__ import annotations

import functools
from pathlib import Path

import astropy.units as u
import numpy as np

from ..config_keys import suggest
from ..errors import InputFileError


@functools.lru_cache(maxsize=1)
def known_filter_names() -> tuple[str, ...]:
    """All filter names speclite can load offline (sorted)."""
    import speclite.filters

    folder = Path(speclite.filters.get_path_of_data_file("filters/"))
    return tuple(sorted(p.name[: -len(".ecsv")] for p in folder.glob("*-*.ecsv")))


def unknown_filter_message(name: str) -> str:
    """``"unknown filter 'x' (did you mean 'y'?)"``, or a pointer to the list of names."""
    names = known_filter_names()
    hint = suggest(name, names)
    if not hint:
        groups = sorted({n.split("-")[0] for n in names})
        hint = f"; known groups: {', '.join(groups)} (names like 'twomass-Ks')"
    return f"unknown filter {name!r}{hint}"


def check_filter_name(name: str) -> str:
    """Return speclite's spelling of ``name`` (matched case-insensitively).

    Raises
    ------
    InputFileError
        If speclite has no filter of that name (the message suggests close names).
    """
    names = known_filter_names()
    if name in names:
        return name
    folded = [n for n in names if n.lower() == str(name).strip().lower()]
    if len(folded) == 1:
        return folded[0]
    raise InputFileError(unknown_filter_message(name))


@functools.lru_cache(maxsize=None)
def _load(name: str):
    import speclite.filters

    response = speclite.filters.load_filter(check_filter_name(name))
    wavelength_um = (np.asarray(response.wavelength, dtype=float)
                     * speclite.filters.default_wavelength_unit).to_value(u.um)
    curve = np.asarray(response.response, dtype=float)
    effective_um = float(response.effective_wavelength.to_value(u.um))
    for arr in (wavelength_um, curve):
        arr.setflags(write=False)  # cached: callers must not modify the shared arrays
    return wavelength_um, curve, effective_um


def load_filter(name: str) -> tuple[np.ndarray, np.ndarray]:
    """Response curve of a filter.

    Parameters
    ----------
    name : str
        speclite filter name, e.g. ``"twomass-Ks"``.

    Returns
    -------
    wavelength_um : ndarray (m,)
        Ascending wavelengths in µm (read-only, cached).
    response : ndarray (m,)
        Dimensionless response at those wavelengths, as tabulated by speclite
        (read-only, cached).

    Raises
    ------
    InputFileError
        If speclite has no filter of that name (the message suggests close names).
    """
    wavelength_um, curve, _ = _load(name)
    return wavelength_um, curve


def filter_effective_wavelength(name: str) -> float:
    """Effective wavelength of a filter in µm, as defined and computed by speclite.

    speclite defines it as the mean photon-weighted wavelength of the
    response (``FilterResponse.effective_wavelength``); we use its value
    unchanged, so it is the wavelength at which photometry is placed.
    """
    return _load(name)[2]
