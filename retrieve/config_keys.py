"""Validation helpers shared by every TOML configuration section."""
from __future__ import annotations

import difflib
from collections.abc import Iterable, Mapping

from .errors import ConfigError


def suggest(key: str, allowed: Iterable[str]) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest allowed key, or ``""``."""
    match = difflib.get_close_matches(key, list(allowed), n=1, cutoff=0.6)
    return f" (did you mean {match[0]!r}?)" if match else ""


def check_keys(mapping: Mapping, allowed: Iterable[str], where: str, required: Iterable[str] = ()) -> None:
    """Raise :class:`ConfigError` for an unknown or a missing key.

    Parameters
    ----------
    mapping : Mapping
        The parsed TOML table.
    allowed : iterable of str
        Valid keys.
    where : str
        Location for the message, e.g. ``"fit.toml [model]"``.
    required : iterable of str
        Keys that must be present.
    """
    allowed = list(allowed)
    for key in mapping:
        if key not in allowed:
            raise ConfigError(f"{where}: unknown key {key!r}{suggest(key, allowed)}")
    for key in required:
        if key not in mapping:
            raise ConfigError(f"{where}: missing required key {key!r}")


def expect_type(value, types, where: str, key: str):
    """Return ``value`` if it has one of ``types``; else a one-line :class:`ConfigError`."""
    if isinstance(value, bool) and bool not in (types if isinstance(types, tuple) else (types,)):
        ok = False
    else:
        ok = isinstance(value, types)
    if not ok:
        names = "/".join(t.__name__ for t in (types if isinstance(types, tuple) else (types,)))
        raise ConfigError(f"{where}: key {key!r} must be {names}, got {type(value).__name__} {value!r}")
    return value
