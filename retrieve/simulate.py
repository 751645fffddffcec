"""Simulated observations: forward-model a spectrum (and photometry), optionally add noise.

Configuration (TOML): the same ``[object]``, ``[model]`` and ``[parameters]``
sections as a fit, plus ``[simulate]``:

=========================  ==============================================================
key                        meaning
=========================  ==============================================================
``template``               dataset file whose wavelengths / channel edges / resolving power
                           (and, without ``snr``, uncertainties or covariance) are used
``wavelength_range_um``    ``[low, high]``: instead of a template, channels from ``low`` to
                           ``high`` ...
``channels``               ... this many, equally spaced in ln λ, edges at geometric midpoints
``resolving_power``        λ/Δλ of the Gaussian line-spread function (with a range; overrides
                           the template's)
``filters``                photometric filters (speclite names), written as a second dataset
``snr``                    S/N of each channel at the median model flux of the spectrum
                           (σ is the same for every channel: speckle/background-limited noise)
``snr_photometry``         the same for the photometric points (default: ``snr``)
``correlated_fraction``    A in C_ij = σ_i σ_j [A exp(-½(Δλ_ij/ℓ)²) + (1-A) δ_ij]
                           (Greco & Brandt 2016, ApJ 833, 134); default 0
``correlation_length_um``  ℓ in µm (needed when ``correlated_fraction`` > 0)
``noise``                  add a noise draw (default true); false writes the model itself
``seed``                   seed of the noise draw (default 0; ``--seed`` overrides)
``name``                   dataset name (default ``"sim"``; photometry: ``<name>_phot``)
``truths``                 table of parameter values; completes / overrides ``[parameters]``
=========================  ==============================================================

Every model parameter must have a number, in ``[parameters]`` or ``truths``;
those numbers are written to the output's metadata under ``truths``.
"""
from __future__ import annotations

import dataclasses
import math
import tomllib
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from .config_keys import check_keys, expect_type
from .errors import ConfigError, ModelEvaluationError
from .observations.dataset import Dataset

SIMULATE_KEYS = ("template", "wavelength_range_um", "channels", "resolving_power", "filters", "snr",
                 "snr_photometry", "correlated_fraction", "correlation_length_um", "noise", "seed", "name",
                 "truths")
TOP_KEYS = ("object", "model", "parameters", "datasets", "sampler", "simulate")


def correlated_covariance(wavelength_um, sigma, fraction: float, length_um: float | None) -> np.ndarray:
    """C_ij = σ_i σ_j [A exp(-½ (Δλ_ij/ℓ)²) + (1 − A) δ_ij] (Greco & Brandt 2016, ApJ 833, 134).

    The diagonal stays σ², whatever A: the kernel moves part of each channel's
    variance into a component shared with its neighbours.
    """
    sigma = np.asarray(sigma, dtype=np.float64)
    kern = np.zeros((sigma.size, sigma.size))
    if fraction > 0:
        dl = np.subtract.outer(wavelength_um, wavelength_um)
        kern = fraction * np.exp(-0.5 * (dl / length_um) ** 2)
    kern[np.diag_indices(sigma.size)] += 1.0 - fraction
    return sigma[:, None] * sigma[None, :] * kern


@dataclasses.dataclass
class SimulationSettings:
    """The validated ``[simulate]`` section (see module docstring)."""

    template: Path | None = None
    wavelength_range_um: tuple | None = None
    channels: int | None = None
    resolving_power: float | None = None
    filters: list = dataclasses.field(default_factory=list)
    snr: float | None = None
    snr_photometry: float | None = None
    correlated_fraction: float = 0.0
    correlation_length_um: float | None = None
    noise: bool = True
    seed: int = 0
    name: str = "sim"
    truths: dict = dataclasses.field(default_factory=dict)

    @classmethod
    def from_mapping(cls, mapping: Mapping, where: str, base_dir: Path | None = None) -> "SimulationSettings":
        check_keys(mapping, SIMULATE_KEYS, where)
        num = (int, float)
        s = cls()
        if "template" in mapping:
            s.template = Path(expect_type(mapping["template"], str, where, "template"))
            if base_dir is not None and not s.template.is_absolute():
                s.template = Path(base_dir) / s.template
        if "wavelength_range_um" in mapping:
            wr = expect_type(mapping["wavelength_range_um"], list, where, "wavelength_range_um")
            if len(wr) != 2 or not all(isinstance(v, num) and not isinstance(v, bool) for v in wr) \
                    or not 0 < wr[0] < wr[1]:
                raise ConfigError(f"{where}: key 'wavelength_range_um' must be [low, high] with 0 < low < high")
            s.wavelength_range_um = (float(wr[0]), float(wr[1]))
        if "channels" in mapping:
            s.channels = expect_type(mapping["channels"], int, where, "channels")
            if s.channels < 2:
                raise ConfigError(f"{where}: key 'channels' must be at least 2")
        for key in ("resolving_power", "snr", "snr_photometry", "correlation_length_um"):
            if key in mapping:
                v = float(expect_type(mapping[key], num, where, key))
                if not (math.isfinite(v) and v > 0):
                    raise ConfigError(f"{where}: key {key!r} must be positive, got {v}")
                setattr(s, key, v)
        if "correlated_fraction" in mapping:
            s.correlated_fraction = float(expect_type(mapping["correlated_fraction"], num, where,
                                                      "correlated_fraction"))
            if not 0.0 <= s.correlated_fraction < 1.0:
                raise ConfigError(f"{where}: key 'correlated_fraction' must be in [0, 1)")
            if s.correlated_fraction > 0 and s.correlation_length_um is None:
                raise ConfigError(f"{where}: 'correlated_fraction' needs 'correlation_length_um'")
        if "filters" in mapping:
            s.filters = expect_type(mapping["filters"], list, where, "filters")
            if not all(isinstance(f, str) for f in s.filters):
                raise ConfigError(f"{where}: key 'filters' must be a list of filter names")
        s.noise = expect_type(mapping.get("noise", True), bool, where, "noise")
        s.seed = expect_type(mapping.get("seed", 0), int, where, "seed")
        s.name = expect_type(mapping.get("name", "sim"), str, where, "name")
        s.truths = dict(expect_type(mapping.get("truths", {}), dict, where, "truths"))
        if s.template is None and (s.wavelength_range_um is None or s.channels is None):
            if not s.filters:
                raise ConfigError(f"{where}: give 'template', or 'wavelength_range_um' and 'channels', "
                                  f"or 'filters'")
        if s.template is not None and s.wavelength_range_um is not None:
            raise ConfigError(f"{where}: give either 'template' or 'wavelength_range_um', not both")
        if s.noise and s.snr is None and s.template is None and s.wavelength_range_um is not None:
            raise ConfigError(f"{where}: noise = true needs 'snr' (or a template with uncertainties)")
        if s.noise and s.filters and s.snr is None and s.snr_photometry is None:
            raise ConfigError(f"{where}: noise = true with 'filters' needs 'snr_photometry' or 'snr'")
        return s


@dataclasses.dataclass
class SimulationResult:
    """Simulated datasets (noisy if asked), the noiseless model, and the truths."""

    datasets: list
    model_flux: dict
    truths: dict
    output: object   # ModelOutput of the forward model
    settings: SimulationSettings | None = None


def log_spaced_channels(low_um: float, high_um: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Channel centres equally spaced in ln λ and edges at geometric midpoints, spanning [low, high]."""
    edges = np.geomspace(low_um, high_um, n + 1)
    centres = np.sqrt(edges[:-1] * edges[1:])
    return centres, np.column_stack([edges[:-1], edges[1:]])


def _templates(settings: SimulationSettings) -> list[Dataset]:
    out = []
    if settings.template is not None:
        from .observations.readers import read_dataset

        d = read_dataset(settings.template)
        r = settings.resolving_power if settings.resolving_power is not None else d.resolving_power
        out.append(dataclasses.replace(d, name=settings.name, resolving_power=r, meta={}))
    elif settings.wavelength_range_um is not None:
        centres, edges = log_spaced_channels(*settings.wavelength_range_um, settings.channels)
        zeros = np.zeros(centres.size)
        out.append(Dataset(name=settings.name, kind="spectrum", wavelength_um=centres, flux=zeros,
                           uncertainty=zeros.copy(), resolving_power=settings.resolving_power,
                           channel_edges_um=edges))
    if settings.filters:
        eff = _filter_wavelengths(settings.filters)
        order = np.argsort(eff)
        zeros = np.zeros(len(order))
        out.append(Dataset(name=f"{settings.name}_phot", kind="photometry", wavelength_um=eff[order],
                           flux=zeros, uncertainty=zeros.copy(), filters=[settings.filters[i] for i in order]))
    return out


def _filter_wavelengths(filters: list[str]) -> np.ndarray:
    """Effective wavelengths of speclite filters (µm)."""
    import speclite.filters

    out = []
    for f in filters:
        try:
            resp = speclite.filters.load_filter(f)
        except (ValueError, OSError):
            raise ConfigError(f"[simulate] filters: unknown filter {f!r} (use speclite names, e.g. 'twomass-Ks')") from None
        out.append(resp.effective_wavelength.to_value("um"))
    return np.asarray(out, dtype=np.float64)


def _truths(parameters: Mapping, settings: SimulationSettings, names_needed, where: str) -> dict:
    truths = {}
    for key, value in {**parameters, **settings.truths}.items():
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            truths[key] = float(value)
    missing = []
    for group in names_needed:
        if not any(n in truths for n in group):
            missing.append(" / ".join(group))
    if missing:
        raise ConfigError(f"{where}: simulation needs a number for {missing[0]} in [parameters] "
                          f"or [simulate] truths")
    return truths


def _noisy(dataset: Dataset, model: np.ndarray, snr: float | None, settings: SimulationSettings,
           rng: np.random.Generator) -> Dataset:
    if snr is not None:
        sigma = np.full(model.size, float(np.median(np.abs(model))) / snr)
        cov = correlated_covariance(dataset.wavelength_um, sigma, settings.correlated_fraction,
                                    settings.correlation_length_um) if settings.correlated_fraction > 0 \
            and dataset.kind == "spectrum" else None
    else:   # template's own errors
        sigma = np.asarray(dataset.uncertainty, dtype=np.float64)
        cov = dataset.covariance
        if cov is None and settings.correlated_fraction > 0 and dataset.kind == "spectrum":
            cov = correlated_covariance(dataset.wavelength_um, sigma, settings.correlated_fraction,
                                        settings.correlation_length_um)
        if not np.all(sigma > 0):
            raise ConfigError(f"{dataset.source}: template uncertainties must be positive to simulate noise "
                              f"(or give [simulate] snr)")
    flux = model.copy()
    if settings.noise:
        if cov is not None:
            flux += np.linalg.cholesky(cov) @ rng.standard_normal(model.size)
        else:
            flux += sigma * rng.standard_normal(model.size)
    return dataclasses.replace(dataset, flux=flux, uncertainty=sigma, covariance=cov, source=None)


def simulate(mapping: Mapping, where: str = "configuration", base_dir: str | Path = ".", seed: int | None = None,
             model=None) -> SimulationResult:
    """Simulate the datasets described by a parsed configuration.

    Parameters
    ----------
    mapping : Mapping
        Parsed TOML with ``[model]``, ``[parameters]`` and ``[simulate]``.
    where : str
        Location for messages (the file name).
    base_dir : path-like
        Folder that relative paths (template, opacity_dir) are relative to.
    seed : int, optional
        Overrides ``[simulate] seed``.
    model : ForwardModel, optional
        A ready model (tests, notebooks); default: built from ``[model]``.

    Raises
    ------
    ConfigError
        Invalid sections, missing parameter values.
    """
    from .forward_model import ForwardModel, ModelSpec

    check_keys(mapping, TOP_KEYS, where)
    settings = SimulationSettings.from_mapping(mapping.get("simulate", {}), f"{where} [simulate]", Path(base_dir))
    if seed is not None:
        settings.seed = int(seed)
    templates = _templates(settings)
    if model is None:
        spec = ModelSpec.from_mapping(mapping.get("model", {}), f"{where} [model]", base_dir=base_dir)
        model = ForwardModel(spec, templates)
    truths = _truths(mapping.get("parameters", {}), settings, model.required_parameters(), f"{where} [parameters]")
    try:
        out = model.evaluate(truths)
    except ModelEvaluationError as exc:
        raise ConfigError(f"{where}: the model cannot be evaluated for these parameters ({exc})") from None
    rng = np.random.default_rng(settings.seed)
    noisy = []
    for d in templates:
        snr = settings.snr if d.kind == "spectrum" else (settings.snr_photometry or settings.snr)
        noisy.append(_noisy(d, out.per_dataset[d.name], snr, settings, rng))
    return SimulationResult(datasets=noisy, model_flux=dict(out.per_dataset), truths=truths, output=out,
                            settings=settings)


def load_and_simulate(path: str | Path, seed: int | None = None) -> SimulationResult:
    """Read a TOML configuration file and :func:`simulate` it."""
    path = Path(path)
    if not path.is_file():
        raise ConfigError(f"{path}: configuration file not found")
    try:
        mapping = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML ({exc})") from None
    return simulate(mapping, where=str(path), base_dir=path.parent, seed=seed)


def output_paths(out: str | Path, datasets: list[Dataset]) -> list[Path]:
    """The spectrum goes to ``out``; a photometry dataset to ``<stem>_phot<suffix>`` beside it."""
    out = Path(out)
    paths = []
    for d in datasets:
        if d.kind == "photometry" and any(x.kind == "spectrum" for x in datasets):
            paths.append(out.with_name(f"{out.stem}_phot{out.suffix}"))
        else:
            paths.append(out)
    return paths


def write_simulation(result: SimulationResult, out: str | Path, overwrite: bool = False,
                     settings_meta: dict | None = None) -> list[Path]:
    """Write every simulated dataset (ECSV, with covariance) with the truths in its metadata."""
    from .errors import InputFileError
    from .observations.writers import write_dataset

    paths = output_paths(out, result.datasets)
    for p in paths:     # refuse before writing anything
        if p.exists() and not overwrite:
            raise InputFileError(f"{p}: file exists; pass --overwrite to replace it")
    for d, p in zip(result.datasets, paths):
        meta = {"truths": result.truths, "simulated": True, "model_flux": result.model_flux[d.name]}
        sim = dict(settings_meta or {})
        if result.settings is not None:
            st = result.settings
            sim.update(seed=st.seed, noise=st.noise, snr=st.snr, snr_photometry=st.snr_photometry,
                       correlated_fraction=st.correlated_fraction, correlation_length_um=st.correlation_length_um)
        meta["simulation"] = {k: v for k, v in sim.items() if v is not None}
        write_dataset(d, p, meta=meta, overwrite=overwrite)
    return paths
