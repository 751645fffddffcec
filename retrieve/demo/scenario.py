"""The invented demonstration scenario: the young star Kessavar and its two companions.

Everything here is fiction made up for the demo (no real star, instrument or
data): a young (≈45 Myr) star at 27.4 pc with

* **Kessavar b**, a warm L-type companion (photosphere ≈1750 K): strong
  water, CO, very little methane;
* **Kessavar c**, a cool T-type companion (photosphere ≈950 K): strong
  water and methane, little CO;

observed by a low-resolution integral-field spectrograph in Y–H
(0.95–1.80 µm, 40 channels equally spaced in ln λ, R = 40, speckle noise
correlated between neighbouring channels) plus 2MASS Ks and WISE W1
photometry (speclite's ``twomass-Ks`` and ``wise2010-W1`` response curves).
The spectrum files carry the channel covariance, which the fits use; a
flux-scale factor absorbs the IFS calibration uncertainty.

This module writes the simulation and fit configurations (TOML) for each
companion; ``retrieve simulate`` turns a simulation configuration into an
ECSV spectrum (truths in its metadata) and ``retrieve fit`` fits it.
The files in the project's ``examples/`` folder were generated with
:func:`write_scenario` and ``retrieve simulate``.
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

STAR = {
    "name": "Kessavar",
    "distance_pc": 27.4,
    "age_myr": 45.0,
    "description": "invented young nearby star (fiction, demo only)",
}

INSTRUMENT = {
    "wavelength_range_um": (0.95, 1.80),
    "channels": 40,
    "resolving_power": 40.0,
    "filters": ("twomass-Ks", "wise2010-W1"),
    "snr": 25.0,                    # per channel at the median flux
    "snr_photometry": 20.0,
    "correlated_fraction": 0.4,     # share of each channel's variance correlated with neighbours
    "correlation_length_um": 0.05,  # ≈ 2 channels
}

#: Edges of the pressure bands of the gradient T–P profile (bar, ascending; the first and
#: last band extend to the top and bottom of the atmosphere); the same for simulation and fit.
#: A gradient profile with non-negative d ln T / d ln P cannot invert, which keeps the
#: short demo fits away from inverted-profile modes.
GRADIENT_PRESSURES_BAR = (1e-4, 0.05, 1.0, 30.0)
PRESSURE_RANGE_BAR = (1e-4, 30.0)
ABSORBERS = ("H2O", "CH4", "CO")
#: Parameters whose recovery the demo checks (truth inside the 95 % interval).
MAIN_PARAMETERS = ("log_g", "radius_rjup", "t_deep", "log_vmr_H2O")


@dataclasses.dataclass(frozen=True)
class Companion:
    """One invented companion: its label, class, true parameters and simulation seed."""

    key: str
    name: str
    spectral_class: str
    truths: dict
    seed: int
    main_parameters: tuple = MAIN_PARAMETERS

    @property
    def slug(self) -> str:
        return f"kessavar_{self.key}"


COMPANIONS = (
    Companion(
        key="b", name="Kessavar b", spectral_class="L-type, photosphere ≈1750 K, little CH4",
        # T(30 bar) = 2700 K, T(1 bar) ≈ 1750 K, T(0.05 bar) ≈ 1300 K, T(1e-4 bar) ≈ 950 K
        truths={"log_g": 4.1, "radius_rjup": 1.30, "t_deep": 2700.0, "dlnt_dlnp_0": 0.05, "dlnt_dlnp_1": 0.10,
                "dlnt_dlnp_2": 0.127, "log_vmr_H2O": -3.3, "log_vmr_CH4": -7.0, "log_vmr_CO": -3.3},
        seed=101),
    Companion(
        key="c", name="Kessavar c", spectral_class="T-type, photosphere ≈950 K, strong CH4",
        # T(30 bar) = 1600 K, T(1 bar) ≈ 950 K, T(0.05 bar) ≈ 660 K, T(1e-4 bar) ≈ 460 K
        truths={"log_g": 4.4, "radius_rjup": 1.05, "t_deep": 1600.0, "dlnt_dlnp_0": 0.06, "dlnt_dlnp_1": 0.12,
                "dlnt_dlnp_2": 0.153, "log_vmr_H2O": -3.3, "log_vmr_CH4": -3.5, "log_vmr_CO": -5.0},
        seed=202,
        main_parameters=MAIN_PARAMETERS + ("log_vmr_CH4",)),
)


@dataclasses.dataclass(frozen=True)
class FitSettings:
    """Model resolution and sampler settings of the demo fits."""

    layers: int
    angles: int
    walkers: int
    max_steps: int
    check_every: int
    optimiser_max_evaluations: int
    optimiser_popsize: int
    ball_scale: float
    predictive_draws: int


#: Settings of the full demo (documented in examples/README.md).
FULL = FitSettings(layers=60, angles=4, walkers=32, max_steps=20000, check_every=250,
                   optimiser_max_evaluations=20000, optimiser_popsize=10, ball_scale=1e-3, predictive_draws=200)
#: ``--quick``: coarser model and a short chain (not converged; intervals are indicative), and
#: only the companions in :data:`QUICK_COMPANIONS` are fitted (all are simulated).
QUICK = FitSettings(layers=40, angles=3, walkers=24, max_steps=700, check_every=175,
                    optimiser_max_evaluations=4000, optimiser_popsize=5, ball_scale=5e-2, predictive_draws=60)
QUICK_COMPANIONS = ("c",)

PRIORS = {
    "log_g": (3.0, 5.5),
    "radius_rjup": (0.6, 2.2),
    "t_deep": (800.0, 3000.0),
    "dlnt_dlnp": (0.0, 0.4),
    "log_vmr": (-10.0, -1.5),
    "scale_ifs": (0.7, 1.3),
}


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    return repr(float(v)) if isinstance(v, float) else str(v)


def _model_section(layers: int, angles: int, opacity_dir: str | None) -> list[str]:
    lines = ["[model]",
             f"absorbers = {_toml_value(list(ABSORBERS))}",
             'profile = "gradient"',
             f"gradient_pressures_bar = {_toml_value(list(GRADIENT_PRESSURES_BAR))}",
             'cia = ["H2-H2", "H2-He"]',
             "hminus = true",
             "rayleigh = true",
             'cloud = "none"',
             f"layers = {layers}",
             f"pressure_range_bar = {_toml_value(list(PRESSURE_RANGE_BAR))}",
             f"angles = {angles}"]
    if opacity_dir is not None:
        lines.append(f"opacity_dir = {_toml_value(str(opacity_dir))}")
    return lines


def simulation_toml(companion: Companion, opacity_dir: str | None = None) -> str:
    """``retrieve simulate`` configuration of one companion (truths in ``[parameters]``)."""
    ins = INSTRUMENT
    lines = [f"# Simulated observation of {companion.name} ({companion.spectral_class}).",
             "# Invented scenario for the retrieve demo: no real object or instrument.",
             "", "[object]", f"name = {_toml_value(companion.name)}", ""]
    lines += _model_section(FULL.layers, FULL.angles, opacity_dir)
    lines += ["", "[parameters]", f"distance_pc = {STAR['distance_pc']}"]
    lines += [f"{k} = {_toml_value(float(v))}" for k, v in companion.truths.items()]
    lines += ["", "[simulate]", 'name = "ifs"',
              f"wavelength_range_um = {_toml_value(list(ins['wavelength_range_um']))}",
              f"channels = {ins['channels']}", f"resolving_power = {ins['resolving_power']}",
              f"filters = {_toml_value(list(ins['filters']))}", f"snr = {ins['snr']}",
              f"snr_photometry = {ins['snr_photometry']}",
              f"correlated_fraction = {ins['correlated_fraction']}",
              f"correlation_length_um = {ins['correlation_length_um']}", f"seed = {companion.seed}", ""]
    return "\n".join(lines)


def _uniform(name: str, bounds) -> str:
    return f"{name} = {{ prior = \"uniform\", low = {float(bounds[0])!r}, high = {float(bounds[1])!r} }}"


def fit_toml(companion: Companion, settings: FitSettings = FULL, spectrum: str | None = None,
             photometry: str | None = None, opacity_dir: str | None = None, seed: int = 1) -> str:
    """``retrieve fit`` configuration of one companion.

    ``spectrum`` / ``photometry`` are the data files (default
    ``<slug>_ifs.ecsv`` and ``<slug>_ifs_phot.ecsv`` beside the configuration).
    """
    spectrum = spectrum or f"{companion.slug}_ifs.ecsv"
    photometry = photometry or f"{companion.slug}_ifs_phot.ecsv"
    lines = [f"# Fit of {companion.name} ({companion.spectral_class}); invented demo scenario.",
             "", "[object]", f"name = {_toml_value(companion.name)}", ""]
    lines += _model_section(settings.layers, settings.angles, opacity_dir)
    lines += ["", "[parameters]", f"distance_pc = {STAR['distance_pc']}   # parallax distance, taken as exact",
              _uniform("log_g", PRIORS["log_g"]), _uniform("radius_rjup", PRIORS["radius_rjup"])]
    lines += [_uniform("t_deep", PRIORS["t_deep"])]
    lines += [_uniform(f"dlnt_dlnp_{i}", PRIORS["dlnt_dlnp"]) for i in range(len(GRADIENT_PRESSURES_BAR) - 1)]
    lines += [_uniform(f"log_vmr_{m}", PRIORS["log_vmr"]) for m in ABSORBERS]
    lines += [_uniform("scale_ifs", PRIORS["scale_ifs"])]
    # the spectrum file carries its channel covariance (correlated speckle noise), used as is
    lines += ["", "[[datasets]]", 'name = "ifs"', f"file = {_toml_value(spectrum)}", "scale = true",
              "", "[[datasets]]", 'name = "phot"', f"file = {_toml_value(photometry)}",
              "", "[sampler]", f"walkers = {settings.walkers}", f"max_steps = {settings.max_steps}",
              f"check_every = {settings.check_every}", f"seed = {seed}",
              f"optimiser_max_evaluations = {settings.optimiser_max_evaluations}",
              f"optimiser_popsize = {settings.optimiser_popsize}", f"ball_scale = {settings.ball_scale!r}",
              f"predictive_draws = {settings.predictive_draws}", ""]
    return "\n".join(lines)


def write_scenario(folder, settings: FitSettings = FULL, opacity_dir: str | None = None,
                   companions=COMPANIONS, overwrite: bool = False) -> dict[str, dict[str, Path]]:
    """Write ``<slug>_simulate.toml`` and ``<slug>_fit.toml`` for each companion into ``folder``.

    Returns ``{key: {"simulate": path, "fit": path, "spectrum": path, "photometry": path}}``
    (the data paths are where ``retrieve simulate --out <spectrum>`` puts its files).
    """
    from ..observations.writers import atomic_write_text

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    out = {}
    for comp in companions:
        paths = {"simulate": folder / f"{comp.slug}_simulate.toml", "fit": folder / f"{comp.slug}_fit.toml",
                 "spectrum": folder / f"{comp.slug}_ifs.ecsv", "photometry": folder / f"{comp.slug}_ifs_phot.ecsv"}
        atomic_write_text(paths["simulate"], simulation_toml(comp, opacity_dir), overwrite=overwrite)
        atomic_write_text(paths["fit"], fit_toml(comp, settings, opacity_dir=opacity_dir), overwrite=overwrite)
        out[comp.key] = paths
    return out
