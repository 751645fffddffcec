"""The emission forward model: parameters -> spectrum on each dataset's points.

Stages (DEVELOPERS.md, "Architecture"): pressure levels -> T–P profile ->
free chemistry -> molecular opacity (tables) + CIA + H⁻ + Rayleigh -> optical
depth (hydrostatics) + grey cloud -> emission (linear-in-τ source,
Gauss–Legendre μ) -> dilution (R/d)² -> instrument operator per dataset.

Wavelength grid: the molecular tables' grid (bin centres for k-tables), cut
to the window the datasets need (``instrument.required_wavelength_range``)
plus one grid point on either side; the whole table grid if no datasets
are given.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from .atmosphere.chemistry import FreeChemistry
from .atmosphere.hydrostatics import layer_optical_depth
from .atmosphere.pressure import DEFAULT_N_LEVELS, DEFAULT_PRESSURE_RANGE_BAR, pressure_levels
from .atmosphere.profiles import PROFILES, build_profile
from .config_keys import check_keys, expect_type
from .constants import AMU_CGS, PC_M, R_JUP_M
from .errors import ConfigError, ModelEvaluationError
from .radiative_transfer import PlanckCache, emission_flux, gauss_legendre_mu

DEFAULT_ANGLES = 4
_VMR_SCALE = 1e20   # keeps float32 σ·VMR products well inside the normal float32 range
OPACITY_KINDS = ("auto", "cross_section", "ktable")
_BASE_KEYS = ("absorbers", "profile", "cia", "hminus", "rayleigh", "cloud", "layers",
              "pressure_range_bar", "angles", "opacity_dir", "opacity_kind")


def _profile_keys() -> list[str]:
    return sorted({k for cls in PROFILES.values() for k in cls.option_keys})


@dataclasses.dataclass
class ModelSpec:
    """The validated ``[model]`` section.

    Attributes
    ----------
    absorbers : list of str
        Molecular / atomic absorbers with tables (``log_vmr_<name>`` parameters).
    profile : str
        Key of :data:`retrieve.atmosphere.profiles.PROFILES`.
    profile_options : dict
        Profile-specific keys (``knot_pressures_bar``, ``knot_columns_g_cm2``, ``knot_optical_depths``,
        ``gradient_pressures_bar``, ``guillot_f``).
    cia : list of str
        Collision pairs, default ``["H2-H2", "H2-He"]``.
    hminus, rayleigh : bool
        H⁻ bound–free/free–free and H₂/He Rayleigh opacity, default True.
    cloud : str
        Key of :data:`retrieve.opacity.clouds.CLOUD_MODELS` (``"none"``, ``"grey"``).
    layers : int
        Number of pressure levels (default 80).
    pressure_range_bar : (float, float)
        Top and bottom level (default 1e-5, 100 bar).
    angles : int
        Gauss–Legendre nodes in μ (default 4).
    opacity_dir : Path or None
    opacity_kind : {"auto", "cross_section", "ktable"}
        Which molecular tables to use; "auto" takes cross sections where a
        folder holds both.
    """

    absorbers: list
    profile: str = "isothermal"
    profile_options: dict = dataclasses.field(default_factory=dict)
    cia: list = dataclasses.field(default_factory=lambda: ["H2-H2", "H2-He"])
    hminus: bool = True
    rayleigh: bool = True
    cloud: str = "none"
    layers: int = DEFAULT_N_LEVELS
    pressure_range_bar: tuple = DEFAULT_PRESSURE_RANGE_BAR
    angles: int = DEFAULT_ANGLES
    opacity_dir: Path | None = None
    opacity_kind: str = "auto"

    @classmethod
    def from_mapping(cls, mapping: Mapping, where: str = "[model]", base_dir: str | Path | None = None) -> "ModelSpec":
        """Validate a parsed ``[model]`` table.

        Parameters
        ----------
        mapping : Mapping
        where : str
            Location for messages, e.g. ``"fit.toml [model]"``.
        base_dir : path-like, optional
            Folder that a relative ``opacity_dir`` is relative to (the config file's).
        """
        check_keys(mapping, list(_BASE_KEYS) + _profile_keys(), where, required=("absorbers",))
        absorbers = expect_type(mapping["absorbers"], list, where, "absorbers")
        if not absorbers or not all(isinstance(a, str) for a in absorbers):
            raise ConfigError(f"{where}: key 'absorbers' must be a non-empty list of species names")
        profile = expect_type(mapping.get("profile", "isothermal"), str, where, "profile")
        from .config_keys import suggest
        if profile not in PROFILES:
            raise ConfigError(f"{where}: unknown profile {profile!r}{suggest(profile, PROFILES)}; "
                              f"choose one of {sorted(PROFILES)}")
        allowed = PROFILES[profile].option_keys
        for key in _profile_keys():
            if key in mapping and key not in allowed:
                raise ConfigError(f"{where}: key {key!r} does not apply to profile {profile!r}")
        options = {k: mapping[k] for k in allowed if k in mapping}
        build_profile(profile, options, where)       # validates the options now, not at first evaluation
        cia = expect_type(mapping.get("cia", ["H2-H2", "H2-He"]), list, where, "cia")
        for pair in cia:
            if not isinstance(pair, str) or pair.count("-") != 1:
                raise ConfigError(f"{where}: key 'cia' entries must look like 'H2-He', got {pair!r}")
        from .opacity.clouds import CLOUD_MODELS

        cloud = expect_type(mapping.get("cloud", "none"), str, where, "cloud")
        if cloud not in CLOUD_MODELS:
            raise ConfigError(f"{where}: key 'cloud' must be one of {sorted(CLOUD_MODELS)}, got {cloud!r}"
                              f"{suggest(cloud, CLOUD_MODELS)}")
        layers = expect_type(mapping.get("layers", DEFAULT_N_LEVELS), int, where, "layers")
        angles = expect_type(mapping.get("angles", DEFAULT_ANGLES), int, where, "angles")
        if not 1 <= angles <= 64:
            raise ConfigError(f"{where}: key 'angles' must be between 1 and 64, got {angles}")
        prange = expect_type(mapping.get("pressure_range_bar", list(DEFAULT_PRESSURE_RANGE_BAR)), list, where,
                             "pressure_range_bar")
        if len(prange) != 2 or not all(isinstance(p, (int, float)) and not isinstance(p, bool) for p in prange):
            raise ConfigError(f"{where}: key 'pressure_range_bar' must be [top, bottom] in bar, got {prange!r}")
        try:
            pressure_levels(float(prange[0]), float(prange[1]), layers)
        except ConfigError as exc:
            raise ConfigError(f"{where}: {exc}") from None
        opacity_dir = mapping.get("opacity_dir")
        if opacity_dir is not None:
            opacity_dir = Path(expect_type(opacity_dir, str, where, "opacity_dir"))
            if base_dir is not None and not opacity_dir.is_absolute():
                opacity_dir = Path(base_dir) / opacity_dir
        kind = expect_type(mapping.get("opacity_kind", "auto"), str, where, "opacity_kind")
        if kind not in OPACITY_KINDS:
            raise ConfigError(f"{where}: key 'opacity_kind' must be one of {OPACITY_KINDS}, got {kind!r}")
        return cls(absorbers=list(absorbers), profile=profile, profile_options=options, cia=list(cia),
                   hminus=expect_type(mapping.get("hminus", True), bool, where, "hminus"),
                   rayleigh=expect_type(mapping.get("rayleigh", True), bool, where, "rayleigh"),
                   cloud=cloud, layers=layers, pressure_range_bar=(float(prange[0]), float(prange[1])),
                   angles=angles, opacity_dir=opacity_dir, opacity_kind=kind)


@dataclasses.dataclass
class ModelOutput:
    """One evaluation of the forward model.

    Attributes
    ----------
    wavelength_um : ndarray (n_w,)
        Model grid.
    flux_highres : ndarray (n_w,)
        Flux density at Earth on the model grid, W m⁻² µm⁻¹.
    per_dataset : dict name -> ndarray (n_points,)
        The model on each dataset's points (instrument applied), W m⁻² µm⁻¹.
    pressure_bar, temperature_K : ndarray (n_levels,)
    vmr : dict species -> ndarray (n_levels,)
    contribution : ndarray (n_levels, n_w) or None
        Emission contribution per layer (see
        :func:`retrieve.radiative_transfer.emission_flux`), normalised so that
        each column sums to 1.
    """

    wavelength_um: np.ndarray
    flux_highres: np.ndarray
    per_dataset: dict
    pressure_bar: np.ndarray
    temperature_K: np.ndarray
    vmr: dict
    contribution: np.ndarray | None = None


def _wavelength_window(datasets: Sequence) -> tuple[float, float] | None:
    if not datasets:
        return None
    from .instrument import required_wavelength_range

    ranges = [required_wavelength_range(d) for d in datasets]
    return min(r[0] for r in ranges), max(r[1] for r in ranges)


def _select(grid: np.ndarray, window: tuple[float, float] | None, edges: np.ndarray | None) -> np.ndarray:
    """Indices of grid points (or bins) needed for ``window``, with one point of margin."""
    if window is None:
        return np.arange(grid.size)
    lo, hi = window
    if edges is not None:   # bins overlapping the window
        keep = np.nonzero((edges[1:] > lo) & (edges[:-1] < hi))[0]
        if keep.size == 0:
            raise ConfigError(f"opacity tables ({edges[0]:.4g}–{edges[-1]:.4g} µm) do not cover "
                              f"the datasets' range {lo:.4g}–{hi:.4g} µm")
        return keep
    i0 = max(int(np.searchsorted(grid, lo, side="right")) - 1, 0)
    i1 = min(int(np.searchsorted(grid, hi, side="left")) + 1, grid.size)
    if grid[0] > lo or grid[-1] < hi:
        raise ConfigError(f"opacity tables ({grid[0]:.4g}–{grid[-1]:.4g} µm) do not cover "
                          f"the datasets' range {lo:.4g}–{hi:.4g} µm; build wider tables")
    return np.arange(i0, i1)


class ForwardModel:
    """Emission spectrum of a companion for a set of physical parameters.

    Parameters
    ----------
    spec : ModelSpec
    datasets : list of Dataset
        Determine the wavelength window and the instrument operators.
    opacity : OpacitySet, optional
        Loaded tables; default: ``OpacitySet.load`` with ``spec``'s search path.
    """

    def __init__(self, spec: ModelSpec, datasets: Sequence = (), opacity=None):
        from .opacity.molecular import MolecularOpacity
        from .opacity.opacity_set import OpacitySet

        self.spec = spec
        self.datasets = list(datasets)
        if opacity is None:
            kind = None if spec.opacity_kind == "auto" else spec.opacity_kind
            opacity = OpacitySet.load(spec.absorbers, spec.cia, spec.opacity_dir, kind=kind)
        missing = [s for s in spec.absorbers if s not in opacity.molecular]
        if missing:
            raise ConfigError(f"[model] absorbers: no opacity table loaded for {missing}")
        self.opacity = opacity
        self.pressure_bar = pressure_levels(*spec.pressure_range_bar, spec.layers)
        self.profile = build_profile(spec.profile, spec.profile_options, "[model]")
        self.chemistry = FreeChemistry(spec.absorbers)
        tables = [opacity.molecular[s] for s in spec.absorbers]
        first = tables[0]
        self.kind = first.kind
        window = _wavelength_window(self.datasets)
        keep = _select(first.wavelength_um, window, first.wavelength_edges_um if self.kind == "ktable" else None)
        self.wavelength_um = first.wavelength_um[keep]
        self.molecular = MolecularOpacity(tables, self.pressure_bar, self.wavelength_um)
        self.g_weights = self.molecular.g_weights
        self._set_up_continua()
        from .opacity.clouds import CLOUD_MODELS

        self._cloud = CLOUD_MODELS[spec.cloud]
        self.mu, self.mu_weights = gauss_legendre_mu(spec.angles)
        self._planck = PlanckCache(self.wavelength_um)
        self.operators = self._operators()
        self.profile.bind(self)
        self.parameter_names = self._parameter_names()

    # ---- set-up -------------------------------------------------------------------------------
    def _set_up_continua(self):
        from .opacity.cia import CIAInterpolator

        self._cia = []
        for pair in self.spec.cia:
            a, b = pair.split("-")
            for s in (a, b):
                if s not in ("H2", "He") and s not in self.spec.absorbers:
                    raise ConfigError(f"[model] cia pair {pair!r}: {s} is neither H2, He nor an absorber")
            if pair not in self.opacity.cia:
                raise ConfigError(f"[model] cia: no table loaded for {pair}")
            self._cia.append((a, b, CIAInterpolator(self.opacity.cia[pair], self.wavelength_um)))
        self._hminus = self._rayleigh = None
        if self.spec.hminus:
            from .opacity.hminus import hminus_opacity, thermal_h_and_electron_vmr

            self._hminus = (hminus_opacity, thermal_h_and_electron_vmr)
        if self.spec.rayleigh:
            from .opacity.rayleigh import rayleigh_opacity

            self._rayleigh = rayleigh_opacity

    def _operators(self) -> dict:
        if not self.datasets:
            return {}
        from .instrument import dataset_operator

        return {d.name: dataset_operator(d, self.wavelength_um) for d in self.datasets}

    def _parameter_names(self) -> list[str]:
        names = ["log_g", "radius_rjup", "distance_pc"]
        names += [n for n in self.profile.parameter_names if n not in names]
        names += self.chemistry.parameter_names
        from .opacity.clouds import CLOUD_MODELS

        names += [n for n in CLOUD_MODELS[self.spec.cloud].parameters if n not in names]
        return names

    def required_parameters(self) -> list[tuple[str, ...]]:
        """Groups of parameter names; exactly one name of each group must be given.

        The distance is ``("distance_pc", "parallax_mas")``; every other group has one name.
        """
        return [("distance_pc", "parallax_mas") if n == "distance_pc" else (n,) for n in self.parameter_names]

    def coverage(self) -> dict:
        """Validity ranges for priors and config checks.

        ``temperature_K``: the range of every molecular table (beyond it
        evaluations fail with ``"T above/below table range"``); ``pressure_bar``
        and ``wavelength_um`` as loaded; ``model_wavelength_um``: the model grid's span.
        """
        cov = self.opacity.coverage()
        cov["temperature_K"] = self.molecular.t_range
        cov["model_wavelength_um"] = (float(self.wavelength_um[0]), float(self.wavelength_um[-1]))
        return cov

    # ---- evaluation ---------------------------------------------------------------------------
    def _scalars(self, params: Mapping[str, float]) -> dict:
        missing = [g for g in self.required_parameters() if not any(n in params for n in g)]
        if missing:
            raise ConfigError(f"[parameters]: missing {' / '.join(missing[0])} for the forward model")
        values = {}
        for group in self.required_parameters():
            name = next(n for n in group if n in params)
            try:
                v = float(params[name])
            except (TypeError, ValueError):
                raise ModelEvaluationError("non-finite parameter", name) from None
            if not np.isfinite(v):
                raise ModelEvaluationError("non-finite parameter", name)
            values[name] = v
        if values["radius_rjup"] <= 0:
            raise ModelEvaluationError("parameter out of range", "radius_rjup <= 0")
        if "distance_pc" in values:
            if values["distance_pc"] <= 0:
                raise ModelEvaluationError("parameter out of range", "distance_pc <= 0")
            values["distance_m"] = values["distance_pc"] * PC_M
        else:
            if values["parallax_mas"] <= 0:
                raise ModelEvaluationError("parameter out of range", "parallax_mas <= 0")
            values["distance_m"] = 1000.0 / values["parallax_mas"] * PC_M
        return values

    def _continuum(self, t, comp) -> np.ndarray | None:
        """Sum of CIA, H⁻ and Rayleigh mass opacities (n_levels, n_w), or None."""
        total = None

        def add(x):
            nonlocal total
            total = x if total is None else np.add(total, x, out=total)

        p, mmw, vmr = self.pressure_bar, comp.mmw_amu, comp.vmr
        for a, b, cia in self._cia:
            add(cia.opacity(t, p, vmr[a], vmr[b], mmw))
        if self._hminus is not None:
            hminus_opacity, thermal_h_and_electron_vmr = self._hminus
            vmr_h, vmr_e = thermal_h_and_electron_vmr(t, p)
            add(hminus_opacity(self.wavelength_um, t, p, mmw, vmr_h, vmr_e))
        if self._rayleigh is not None:
            add(self._rayleigh(self.wavelength_um, vmr["H2"], vmr["He"], mmw))
        return total

    def _kappa(self, t, comp) -> np.ndarray:
        """Total mass opacity at the levels: (n_levels, n_w) or (n_levels, n_w, n_g), cm² g⁻¹."""
        sigma = self.molecular.cross_sections(t)
        per_gram = 1.0 / (comp.mmw_amu * AMU_CGS)                       # molecules per gram
        n_l = t.size
        vmr_levels = np.broadcast_to(comp.absorber_vmr, (n_l, comp.absorber_vmr.size))
        if self.kind == "ktable":
            from .opacity.correlated_k import mix_random_overlap

            mixed = mix_random_overlap(np.moveaxis(sigma, 1, 0), vmr_levels.T, self.g_weights)
            kappa = mixed * per_gram[:, None, None]
        else:
            # float32 product scaled by 1e20: σ·x can be ~1e-45, a denormal float32 (slow, imprecise)
            scaled = (vmr_levels * _VMR_SCALE).astype(np.float32)
            mixed = np.matmul(scaled[:, None, :], sigma)[:, 0, :]
            kappa = np.multiply(mixed, (per_gram / _VMR_SCALE)[:, None])   # float64 from here on
        cont = self._continuum(t, comp)
        if cont is not None:
            kappa += cont[:, :, None] if kappa.ndim == 3 else cont
        return kappa

    def evaluate(self, params: Mapping[str, float], contribution: bool = False) -> ModelOutput:
        """Spectrum for ``params`` (a mapping name -> value; extra names are ignored).

        Raises
        ------
        ModelEvaluationError
            Non-finite or out-of-range parameters, temperatures outside the
            opacity tables, VMRs summing above 1, non-finite flux.
        ConfigError
            A required parameter is missing.
        """
        try:
            return self._evaluate(params, contribution)
        except (OverflowError, ZeroDivisionError, FloatingPointError) as exc:
            # Python-float arithmetic on extreme values (e.g. 10.0 ** 400) raises instead of giving inf
            raise ModelEvaluationError("parameter out of range", f"arithmetic overflow: {exc}") from None

    def _evaluate(self, params: Mapping[str, float], contribution: bool) -> ModelOutput:
        values = self._scalars(params)
        gravity = 10.0 ** values["log_g"]
        if not np.isfinite(gravity) or gravity <= 0:
            raise ModelEvaluationError("parameter out of range", "log_g")
        with np.errstate(all="ignore"):
            t = np.asarray(self.profile.temperature(self.pressure_bar, values), dtype=np.float64)
        if not np.all(np.isfinite(t)) or np.any(t <= 0):
            raise ModelEvaluationError("non-physical temperature", "T-P profile gives non-finite or T <= 0")
        comp = self.chemistry.evaluate(values, t.size)
        with np.errstate(over="ignore", under="ignore"):
            kappa = self._kappa(t, comp)
            dtau = layer_optical_depth(kappa, self.pressure_bar, gravity)
            if self._cloud.parameters:
                tau_c = self._cloud.optical_depth(self.pressure_bar, **{n: values[n] for n in self._cloud.parameters})
                d_cloud = np.diff(tau_c)
                if not np.all(np.isfinite(d_cloud)) or np.any(d_cloud < 0):
                    raise ModelEvaluationError("parameter out of range", "cloud optical depth not increasing with P")
                dtau += d_cloud.reshape((-1,) + (1,) * (dtau.ndim - 1))
            result = self._radiate(t, dtau, contribution)
        flux_surface, contrib = result
        dilution = (values["radius_rjup"] * R_JUP_M / values["distance_m"]) ** 2
        flux = flux_surface * dilution
        if not np.all(np.isfinite(flux)):
            raise ModelEvaluationError("non-finite flux")
        per_dataset = {name: op @ flux for name, op in self.operators.items()}
        if contrib is not None:   # normalised per wavelength; 0 where nothing is emitted
            with np.errstate(invalid="ignore", divide="ignore"):
                contrib = np.where(flux_surface[None, :] > 0, contrib / flux_surface[None, :], 0.0)
        return ModelOutput(wavelength_um=self.wavelength_um, flux_highres=flux, per_dataset=per_dataset,
                           pressure_bar=self.pressure_bar, temperature_K=t, vmr=comp.vmr, contribution=contrib)

    def _radiate(self, t, dtau, contribution):
        planck = self._planck(t)                                       # (n_levels, n_w)
        if self.kind != "ktable":
            out = emission_flux(planck, dtau, self.mu, self.mu_weights, contribution)
            return out if contribution else (out, None)
        n_l, n_w, n_g = dtau.shape[0] + 1, dtau.shape[1], dtau.shape[2]
        b = np.broadcast_to(planck[:, :, None], (n_l, n_w, n_g)).reshape(n_l, n_w * n_g)
        out = emission_flux(b, dtau.reshape(n_l - 1, n_w * n_g), self.mu, self.mu_weights, contribution)
        if not contribution:
            return out.reshape(n_w, n_g) @ self.g_weights, None
        flux, contrib = out
        return flux.reshape(n_w, n_g) @ self.g_weights, contrib.reshape(n_l, n_w, n_g) @ self.g_weights
