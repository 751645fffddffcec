"""Units at the edge: parse unit strings and convert to the internal units.

Inside the model wavelength is in µm and spectral flux density in
W m⁻² µm⁻¹ (see :mod:`retrieve.constants`).  Files may use any length unit
for wavelength and any F_λ or F_ν unit for flux; F_ν is converted with
astropy's ``spectral_density`` equivalency at each channel's wavelength.

The bare symbol ``A`` is read as ångström, not ampere: an electric current
never appears in a wavelength or flux unit, while ``erg s-1 cm-2 A-1`` is a
common way to write F_λ.
"""
from __future__ import annotations

import warnings

import astropy.units as u
import numpy as np

WAVELENGTH_UNIT = u.um
FLUX_UNIT = u.W / u.m ** 2 / u.um


class UnitProblem(ValueError):
    """A unit string is unknown or of the wrong kind; the caller adds file/column."""


def _ampere_to_angstrom(unit: u.UnitBase) -> u.UnitBase:
    """Replace every bare ampere factor by ångström (see module docstring)."""
    bases = getattr(unit, "bases", [unit])
    powers = getattr(unit, "powers", [1])
    if not any(b is u.A for b in bases):
        return unit
    scale = getattr(unit, "scale", 1.0)
    out = u.Unit(scale)
    for base, power in zip(bases, powers):
        out = out * (u.AA if base is u.A else base) ** power
    return out


def parse_unit(text) -> u.UnitBase:
    """Parse a unit string (or pass through an astropy unit).

    Parameters
    ----------
    text : str or astropy.units.UnitBase
        E.g. ``"um"``, ``"µm"``, ``"Å"``, ``"erg s-1 cm-2 A-1"``, ``"mJy"``, ``"mJy2"``.

    Returns
    -------
    astropy.units.UnitBase

    Raises
    ------
    UnitProblem
        If the string is empty or not a unit astropy knows.
    """
    if isinstance(text, u.UnrecognizedUnit):
        raise UnitProblem(f"unknown unit {text.name!r}")
    if isinstance(text, u.UnitBase):
        return _ampere_to_angstrom(text)
    s = str(text).strip()
    if not s:
        raise UnitProblem("empty unit")
    last_error = None
    for fmt in (None, "fits", "cds"):
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                unit = u.Unit(s, format=fmt, parse_strict="raise")
            return _ampere_to_angstrom(unit)
        except (ValueError, TypeError) as exc:
            last_error = exc
    raise UnitProblem(f"unknown unit {s!r}") from last_error


def check_wavelength_unit(unit: u.UnitBase) -> u.UnitBase:
    """Return ``unit`` if it is a length, else raise :class:`UnitProblem`."""
    if not unit.is_equivalent(u.m):
        raise UnitProblem(f"unit '{unit}' is not a wavelength (length) unit; use um, nm, Angstrom, m or cm")
    return unit


def check_flux_unit(unit: u.UnitBase) -> u.UnitBase:
    """Return ``unit`` if it is an F_λ or F_ν unit, else raise :class:`UnitProblem`."""
    if not unit.is_equivalent(FLUX_UNIT, equivalencies=u.spectral_density(1.0 * u.um)):
        raise UnitProblem(f"unit '{unit}' is not a spectral flux density; "
                          "use e.g. W m-2 um-1, erg s-1 cm-2 A-1, Jy or mJy")
    return unit


def wavelength_to_um(values, unit: u.UnitBase) -> np.ndarray:
    """Convert wavelengths in ``unit`` to µm (plain float array)."""
    return (np.asarray(values, dtype=float) * unit).to_value(WAVELENGTH_UNIT)


def flux_to_internal(values, unit: u.UnitBase, wavelength_um) -> np.ndarray:
    """Convert flux densities in ``unit`` to W m⁻² µm⁻¹ at each wavelength.

    Parameters
    ----------
    values : array_like (n,)
    unit : astropy unit (F_λ or F_ν)
    wavelength_um : array_like (n,)
        Wavelength of each value, needed for F_ν → F_λ.
    """
    wl = np.asarray(wavelength_um, dtype=float) * WAVELENGTH_UNIT
    return (np.asarray(values, dtype=float) * unit).to_value(
        FLUX_UNIT, equivalencies=u.spectral_density(wl))


def flux_factors(unit: u.UnitBase, wavelength_um) -> np.ndarray:
    """Per-channel factor converting one ``unit`` of flux to W m⁻² µm⁻¹.

    The conversion is linear in flux, so a covariance in ``unit²`` converts
    as ``C_ij f_i f_j``.
    """
    wl = np.asarray(wavelength_um, dtype=float)
    return flux_to_internal(np.ones_like(wl), unit, wl)


def sqrt_flux_unit(unit: u.UnitBase) -> u.UnitBase:
    """Square root of a covariance unit; raise :class:`UnitProblem` unless it is (flux unit)²."""
    root = unit ** 0.5
    try:
        check_flux_unit(root)
    except UnitProblem:
        raise UnitProblem(f"unit '{unit}' is not a flux density squared; use e.g. mJy2 or W2 m-4 um-2") from None
    return root
