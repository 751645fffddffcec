"""Fit configuration: a TOML file validated into frozen dataclasses.

Sections (see DEVELOPERS.md, "TOML configuration layout", and the
"Fit configuration" section for every key):

``[object]``      ``name``
``[model]``       delegated to :meth:`retrieve.forward_model.ModelSpec.from_mapping`
``[parameters]``  ``name = number`` fixes a parameter; ``name = {prior = ..., ...}`` frees it
``[[datasets]]``  ``name``, ``file``, ``covariance``, ``resolving_power``, ``kind``,
                  ``scale``, ``inflate_errors``, ``correlated_noise``
``[sampler]``     see :class:`retrieve.inference.sampler.SamplerSettings`
``[simulate]``    read by ``retrieve simulate`` only; ignored here
``[survey]``      read by ``retrieve batch`` only (:mod:`retrieve.survey.batch`); ignored here

Checks that need the model or the data (every model parameter fixed or free,
nuisance parameters matching the dataset switches, priors inside the opacity
tables' coverage, datasets inside their wavelength range) are in
:func:`check_parameters` and :func:`check_coverage`, called by
:func:`retrieve.inference.run.fit` once both are known.
"""
from __future__ import annotations

import dataclasses
import hashlib
import math
import os
import re
import tomllib
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from ..config_keys import check_keys, expect_type, suggest
from ..errors import ConfigError
from .coordinates import COORDINATES
from .likelihood import NUISANCE_PREFIXES, nuisance_names
from .priors import Gaussian, Prior, prior_from_mapping
from .moves import MOVES
from .sampler import SamplerSettings

TOP_KEYS = ("object", "model", "parameters", "datasets", "sampler", "simulate", "survey")
DATASET_KEYS = ("name", "file", "covariance", "resolving_power", "kind", "scale", "inflate_errors",
                "correlated_noise")
SAMPLER_TYPES = {
    "walkers": int, "max_steps": int, "check_every": int, "seed": int,
    "tau_factor": (int, float), "tau_rtol": (int, float), "burn_in_tau": (int, float),
    "thin_tau": (int, float), "burn_in": int, "thin": int, "optimiser": str,
    "optimiser_max_evaluations": int, "optimiser_popsize": int, "ball_scale": (int, float),
    "predictive_draws": int, "progress": bool, "moves": str, "ball": str,
    "polish_max_evaluations": int, "polish_candidates": int,
    "pilot": str, "pilot_live_points": int, "pilot_dlogz": (int, float), "pilot_steps": int,
    "pilot_rounds": int,
    "mixture_components": int, "coordinates": str,
}
BALLS = ("hessian", "fixed")
OPTIMISERS = ("differential-evolution", "none")
PILOTS = ("none", "nested", "chain")
# Parameters that are temperatures somewhere in the atmosphere (checked against table coverage).
_TEMPERATURE = re.compile(r"^(t_iso|t_deep|t_knot_\d+)$")


@dataclasses.dataclass(frozen=True)
class DatasetConfig:
    """One ``[[datasets]]`` entry (paths resolved relative to the configuration file)."""

    name: str
    file: Path | None = None
    covariance: Path | None = None
    resolving_power: float | None = None
    kind: str | None = None
    scale: bool = False
    inflate_errors: bool = False
    correlated_noise: bool = False

    def noise_switches(self) -> tuple[bool, bool, bool]:
        return self.scale, self.inflate_errors, self.correlated_noise

    def reader_spec(self) -> dict:
        """Keyword arguments for :func:`retrieve.observations.readers.read_object`."""
        spec = {"file": self.file, "name": self.name}
        if self.covariance is not None:
            spec["covariance"] = self.covariance
        if self.resolving_power is not None:
            spec["resolving_power"] = self.resolving_power
        if self.kind is not None:
            spec["kind"] = self.kind
        return spec


@dataclasses.dataclass(frozen=True)
class FitConfig:
    """A validated fit configuration.

    Attributes
    ----------
    object_name : str
    model_mapping : dict
        The raw ``[model]`` table (empty when absent).
    fixed : dict of str to float
    free : dict of str to Prior
        Free parameters in the order of the file.
    datasets : tuple of DatasetConfig
    sampler : SamplerSettings
    source : Path or None
        The file it was read from.
    text : str
        The TOML text (stored in the run manifest).
    base_dir : Path
        Folder relative paths are resolved against.
    """

    object_name: str
    model_mapping: dict
    fixed: dict
    free: dict
    datasets: tuple
    sampler: SamplerSettings
    source: Path | None = None
    text: str = ""
    base_dir: Path = Path(".")

    @property
    def where(self) -> str:
        return str(self.source) if self.source else "configuration"

    @property
    def digest(self) -> str:
        """sha256 of the configuration content (the model-relevant parts)."""
        h = hashlib.sha256()
        h.update(repr(sorted(self.model_mapping.items())).encode())
        h.update(repr(sorted(self.fixed.items())).encode())
        h.update(repr([(k, p.to_dict()) for k, p in self.free.items()]).encode())
        h.update(repr([(d.name, d.noise_switches()) for d in self.datasets]).encode())
        return h.hexdigest()

    def model_spec(self):
        """The validated ``[model]`` as a :class:`retrieve.forward_model.ModelSpec`."""
        from ..forward_model import ModelSpec
        return ModelSpec.from_mapping(self.model_mapping, f"{self.where} [model]", base_dir=self.base_dir)

    def dataset(self, name: str) -> DatasetConfig:
        for d in self.datasets:
            if d.name == name:
                return d
        raise KeyError(name)

    def replace(self, **changes) -> "FitConfig":
        return dataclasses.replace(self, **changes)


# --------------------------------------------------------------------------- parsing
def load_config(path: str | os.PathLike) -> FitConfig:
    """Read and validate a fit configuration file.

    Raises
    ------
    ConfigError
        One line naming the file and key.
    """
    path = Path(path)
    if not path.is_file():
        raise ConfigError(f"{path}: configuration file not found")
    text = path.read_text(encoding="utf-8")
    try:
        mapping = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML ({exc})") from None
    return parse_config(mapping, where=str(path), base_dir=path.parent, text=text, source=path)


def parse_config(mapping: Mapping, where: str = "configuration", base_dir: str | os.PathLike = ".",
                 text: str = "", source: Path | None = None) -> FitConfig:
    """Validate a parsed TOML mapping into a :class:`FitConfig`."""
    check_keys(mapping, TOP_KEYS, where, required=("parameters",))
    base_dir = Path(base_dir)
    obj = _table(mapping, "object", where)
    check_keys(obj, ("name",), f"{where} [object]")
    name = expect_type(obj.get("name", source.stem if source else "object"), str, f"{where} [object]", "name")
    model = dict(_table(mapping, "model", where))
    fixed, free = _parameters(_table(mapping, "parameters", where), f"{where} [parameters]")
    datasets = _datasets(mapping.get("datasets", []), where, base_dir)
    sampler = _sampler(_table(mapping, "sampler", where), f"{where} [sampler]")
    return FitConfig(object_name=name, model_mapping=model, fixed=fixed, free=free,
                     datasets=tuple(datasets), sampler=sampler, source=source, text=text, base_dir=base_dir)


def _table(mapping: Mapping, key: str, where: str) -> Mapping:
    value = mapping.get(key, {})
    if not isinstance(value, Mapping):
        raise ConfigError(f"{where}: [{key}] must be a table, got {type(value).__name__}")
    return value


def _parameters(table: Mapping, where: str) -> tuple[dict, dict]:
    fixed, free = {}, {}
    for key, value in table.items():
        if isinstance(value, Mapping):
            free[key] = prior_from_mapping(value, f"{where} {key}")
        elif isinstance(value, (int, float)) and not isinstance(value, bool):
            if not math.isfinite(value):
                raise ConfigError(f"{where}: fixed value of {key!r} must be finite, got {value}")
            fixed[key] = float(value)
        else:
            raise ConfigError(f"{where}: {key!r} must be a number (fixed) or a table with a prior (free), "
                              f"got {type(value).__name__} {value!r}")
    if not free:
        raise ConfigError(f"{where}: no free parameter; give at least one a prior table")
    return fixed, free


def _datasets(entries, where: str, base_dir: Path) -> list[DatasetConfig]:
    if not isinstance(entries, list):
        raise ConfigError(f"{where}: 'datasets' must be an array of tables ([[datasets]])")
    out, names = [], set()
    for i, entry in enumerate(entries):
        w = f"{where} [[datasets]] #{i + 1}"
        if not isinstance(entry, Mapping):
            raise ConfigError(f"{w}: must be a table")
        check_keys(entry, DATASET_KEYS, w, required=("name",))
        name = expect_type(entry["name"], str, w, "name")
        if not re.fullmatch(r"[A-Za-z][A-Za-z0-9_]*", name):
            raise ConfigError(f"{w}: name {name!r} must start with a letter and hold only letters, digits, '_'")
        if name in names:
            raise ConfigError(f"{w}: duplicate dataset name {name!r}")
        names.add(name)
        w = f"{where} [[datasets]] {name}"
        kw = {"name": name}
        for key in ("file", "covariance"):
            if key in entry:
                p = Path(expect_type(entry[key], str, w, key))
                kw[key] = p if p.is_absolute() else base_dir / p
        if "resolving_power" in entry:
            rp = float(expect_type(entry["resolving_power"], (int, float), w, "resolving_power"))
            if not rp > 0:
                raise ConfigError(f"{w}: resolving_power must be > 0, got {rp}")
            kw["resolving_power"] = rp
        if "kind" in entry:
            kind = expect_type(entry["kind"], str, w, "kind")
            if kind not in ("spectrum", "photometry"):
                raise ConfigError(f"{w}: kind must be 'spectrum' or 'photometry'{suggest(kind, ('spectrum', 'photometry'))}")
            kw["kind"] = kind
        for key in ("scale", "inflate_errors", "correlated_noise"):
            if key in entry:
                kw[key] = expect_type(entry[key], bool, w, key)
        if kw.get("correlated_noise") and "covariance" in kw:
            raise ConfigError(f"{w}: correlated_noise = true cannot be combined with a covariance file; "
                              f"choose one")
        out.append(DatasetConfig(**kw))
    return out


def _sampler(table: Mapping, where: str) -> SamplerSettings:
    check_keys(table, SAMPLER_TYPES, where)
    values = {k: expect_type(v, SAMPLER_TYPES[k], where, k) for k, v in table.items()}
    for key in ("max_steps", "check_every", "optimiser_max_evaluations", "optimiser_popsize"):
        if key in values and values[key] < 1:
            raise ConfigError(f"{where}: {key!r} must be >= 1, got {values[key]}")
    if "ball" in values and values["ball"] not in BALLS:
        raise ConfigError(f"{where}: ball {values['ball']!r} unknown{suggest(values['ball'], BALLS)}; "
                          f"choose one of {', '.join(BALLS)}")
    for key in ("walkers", "burn_in", "predictive_draws", "polish_max_evaluations", "polish_candidates"):
        if key in values and values[key] < 0:
            raise ConfigError(f"{where}: {key!r} must be >= 0, got {values[key]}")
    if "thin" in values and values["thin"] < 1:
        raise ConfigError(f"{where}: 'thin' must be >= 1, got {values['thin']}")
    if values.get("walkers", 0) % 2:
        raise ConfigError(f"{where}: 'walkers' must be even (emcee splits the ensemble in two halves)")
    for key in ("tau_factor", "tau_rtol", "ball_scale", "burn_in_tau", "thin_tau"):
        if key in values and not values[key] > 0:
            raise ConfigError(f"{where}: {key!r} must be > 0, got {values[key]}")
    if "optimiser" in values and values["optimiser"] not in OPTIMISERS:
        raise ConfigError(f"{where}: optimiser {values['optimiser']!r} unknown{suggest(values['optimiser'], OPTIMISERS)}"
                          f"; choose one of {', '.join(OPTIMISERS)}")
    if "moves" in values and values["moves"] not in MOVES:
        raise ConfigError(f"{where}: moves {values['moves']!r} unknown{suggest(values['moves'], MOVES)}; "
                          f"choose one of {', '.join(MOVES)}")
    if "coordinates" in values and values["coordinates"] not in COORDINATES:
        raise ConfigError(f"{where}: coordinates {values['coordinates']!r} unknown"
                          f"{suggest(values['coordinates'], COORDINATES)}; choose one of {', '.join(COORDINATES)}")
    if "pilot" in values and values["pilot"] not in PILOTS:
        raise ConfigError(f"{where}: pilot {values['pilot']!r} unknown{suggest(values['pilot'], PILOTS)}; "
                          f"choose one of {', '.join(PILOTS)}")
    if values.get("pilot_live_points", 10) < 10:
        raise ConfigError(f"{where}: 'pilot_live_points' must be >= 10, got {values['pilot_live_points']}")
    if "pilot_dlogz" in values and not values["pilot_dlogz"] > 0:
        raise ConfigError(f"{where}: 'pilot_dlogz' must be > 0, got {values['pilot_dlogz']}")
    if values.get("pilot_steps", 2) < 2:
        raise ConfigError(f"{where}: 'pilot_steps' must be >= 2, got {values['pilot_steps']}")
    if values.get("pilot_rounds", 1) < 1:
        raise ConfigError(f"{where}: 'pilot_rounds' must be >= 1, got {values['pilot_rounds']}")
    if values.get("mixture_components", 1) < 1:
        raise ConfigError(f"{where}: 'mixture_components' must be >= 1, got {values['mixture_components']}")
    if values.get("moves") == "pilot-mixture" and values.get("pilot", "none") == "none":
        raise ConfigError(f"{where}: moves = \"pilot-mixture\" needs a pilot run; add pilot = \"chain\" "
                          f"or pilot = \"nested\"")
    return SamplerSettings(**values)


# --------------------------------------------------------------------------- checks needing the model
def expected_parameters(model_parameters: Sequence[str], config: FitConfig) -> list[str]:
    """Model parameters followed by the switched-on nuisance parameters."""
    names = list(model_parameters)
    for d in config.datasets:
        names += nuisance_names(d.name, *d.noise_switches())
    return names


def check_parameters(config: FitConfig, model_parameters: Sequence[str]) -> None:
    """Every needed parameter fixed or free, no unknown ones, walkers enough; one-line ConfigError."""
    where = f"{config.where} [parameters]"
    expected = expected_parameters(model_parameters, config)
    given = {**config.fixed, **config.free}
    for name in given:
        if name in expected:
            continue
        for prefix in NUISANCE_PREFIXES:
            ds = name[len(prefix):] if name.startswith(prefix) else None
            if ds and any(d.name == ds for d in config.datasets):
                switch = {"scale_": "scale", "log_inflate_": "inflate_errors"}.get(prefix, "correlated_noise")
                raise ConfigError(f"{where}: {name!r} is given but dataset {ds!r} has {switch} off; "
                                  f"set {switch} = true in its [[datasets]] entry or remove {name!r}")
        raise ConfigError(f"{where}: unknown parameter {name!r}{suggest(name, expected)}")
    for name in expected:
        if name not in given:
            raise ConfigError(f"{where}: missing parameter {name!r} needed by the model; give a number "
                              f"(fixed) or a table with a prior (free)")
    ndim = len(config.free)
    walkers = config.sampler.walkers
    if walkers and walkers < 2 * ndim:
        raise ConfigError(f"{config.where} [sampler]: walkers = {walkers} is fewer than 2 × {ndim} free "
                          f"parameters; use at least {2 * ndim + 2} or 0 (automatic)")


def _range(prior: Prior) -> tuple[float, float]:
    # A Gaussian has unbounded support: check its central 68 % rather than its far tails.
    if isinstance(prior, Gaussian):
        return prior.mean - prior.sigma, prior.mean + prior.sigma
    return prior.bounds


def check_coverage(config: FitConfig, coverage: Mapping | None, object_data=None) -> None:
    """Temperature priors and dataset wavelengths inside the opacity tables' coverage.

    Parameters
    ----------
    coverage : mapping or None
        ``temperature_K``, ``pressure_bar``, ``wavelength_um`` as (min, max)
        (e.g. :meth:`retrieve.opacity.opacity_set.OpacitySet.coverage`); None skips the check.
    object_data : ObjectData, optional
        The datasets to check against the wavelength range.
    """
    if not coverage:
        return
    where = f"{config.where} [parameters]"
    t_range = coverage.get("temperature_K")
    if t_range is not None:
        t_lo, t_hi = map(float, t_range)
        for name in list(config.free) + list(config.fixed):
            if not _TEMPERATURE.match(name):
                continue
            lo, hi = _range(config.free[name]) if name in config.free else (config.fixed[name],) * 2
            if hi > t_hi * (1 + 1e-9):
                raise ConfigError(f"{where}: {name!r} reaches {hi:g} K, above the opacity tables' maximum "
                                  f"temperature {t_hi:g} K; lower it or use tables that extend further")
            if lo < t_lo * (1 - 1e-9):
                raise ConfigError(f"{where}: {name!r} reaches {lo:g} K, below the opacity tables' minimum "
                                  f"temperature {t_lo:g} K; raise it or use tables that extend further")
    p_range = coverage.get("pressure_bar")
    if p_range is not None and "log_p_cloud_top" in config.free:
        lo, hi = _range(config.free["log_p_cloud_top"])
        p_lo, p_hi = np.log10(np.asarray(p_range, dtype=float))
        if lo < p_lo - 1e-9 or hi > p_hi + 1e-9:
            raise ConfigError(f"{where}: 'log_p_cloud_top' prior [{lo:g}, {hi:g}] leaves the opacity tables' "
                              f"pressure range [{p_lo:g}, {p_hi:g}] (log10 bar); narrow it")
    w_range = coverage.get("wavelength_um")
    if w_range is not None and object_data is not None:
        w_lo, w_hi = map(float, w_range)
        for d in object_data.datasets:
            # photometry: the filters' effective wavelengths (the filter curves are the model's business)
            grid = d.channel_edges_um if (d.kind == "spectrum" and d.channel_edges_um is not None) \
                else d.wavelength_um
            lo, hi = float(np.min(grid)), float(np.max(grid))
            if lo < w_lo * (1 - 1e-9) or hi > w_hi * (1 + 1e-9):
                src = d.source or "?"
                raise ConfigError(f"{config.where} [[datasets]] {d.name}: {src} spans {lo:.4g}–{hi:.4g} µm, "
                                  f"outside the opacity tables' range {w_lo:.4g}–{w_hi:.4g} µm; trim the "
                                  f"spectrum or use wider tables")


# --------------------------------------------------------------------------- writing
def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(float(v)) if isinstance(v, float) else str(v)
    if isinstance(v, (str, Path)):
        return '"' + str(v).replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, Mapping):
        return "{ " + ", ".join(f"{k} = {_toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def config_to_toml(config: FitConfig) -> str:
    """TOML text that :func:`parse_config` turns back into ``config`` (for configurations built in Python)."""
    lines = ["[object]", f"name = {_toml_value(config.object_name)}", ""]
    if config.model_mapping:
        lines.append("[model]")
        lines += [f"{k} = {_toml_value(v)}" for k, v in config.model_mapping.items()]
        lines.append("")
    lines.append("[parameters]")
    lines += [f"{k} = {_toml_value(v)}" for k, v in config.fixed.items()]
    lines += [f"{k} = {_toml_value(p.to_dict())}" for k, p in config.free.items()]
    for d in config.datasets:
        lines += ["", "[[datasets]]", f"name = {_toml_value(d.name)}"]
        for key in ("file", "covariance", "resolving_power", "kind"):
            if getattr(d, key) is not None:
                lines.append(f"{key} = {_toml_value(getattr(d, key))}")
        lines += [f"{key} = {_toml_value(getattr(d, key))}" for key in ("scale", "inflate_errors",
                                                                        "correlated_noise")]
    defaults = SamplerSettings()
    changed = {k: v for k, v in dataclasses.asdict(config.sampler).items()
               if v != getattr(defaults, k) and v is not None}
    if changed:
        lines += ["", "[sampler]"] + [f"{k} = {_toml_value(v)}" for k, v in changed.items()]
    return "\n".join(lines) + "\n"
