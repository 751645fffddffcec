"""Temperature–pressure (T–P) profiles.

Each profile is a class with

* ``parameter_names`` — list of parameter names it reads (see DEVELOPERS.md);
* ``temperature(pressure_bar, params)`` — temperatures (K) at the given levels.

It is built from the ``[model]`` options by ``Class.from_options(options, where)``
and registered in :data:`PROFILES` under the name used by ``[model] profile``.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from ..constants import AMU_CGS, BAR_TO_DYN_CM2
from ..errors import ConfigError


class TPProfile:
    """Base class: subclasses set ``parameter_names`` and implement ``temperature``."""

    name = ""
    parameter_names: list[str] = []
    #: [model] keys (besides ``profile``) that this profile reads
    option_keys: tuple[str, ...] = ()

    @classmethod
    def from_options(cls, options: Mapping, where: str) -> "TPProfile":
        return cls()

    def bind(self, model) -> None:
        """Called once by the forward model after its opacities are set up.

        Profiles defined in terms of the model's own opacity (``tau-knots``)
        take what they need here; the others ignore it.
        """

    def temperature(self, pressure_bar: np.ndarray, params: Mapping[str, float]) -> np.ndarray:
        raise NotImplementedError


class IsothermalProfile(TPProfile):
    """T = ``t_iso`` at every level."""

    name = "isothermal"
    parameter_names = ["t_iso"]

    def temperature(self, pressure_bar, params):
        return np.full(np.shape(pressure_bar), float(params["t_iso"]))


class GuillotProfile(TPProfile):
    """Guillot (2010, A&A 520, A27) eq. 29, with τ = κ_IR P / g.

    T⁴ = ¾ T_int⁴ (⅔ + τ) + ¾ T_irr⁴ f [⅔ + 1/(γ√3) + (γ/√3 − 1/(γ√3)) exp(−γ τ √3)]

    Parameters ``t_int``, ``t_irr`` (K), ``log_kappa_ir`` (log10 κ_IR in cm² g⁻¹),
    ``log_gamma`` (log10 of γ = κ_v/κ_IR) and ``log_g``.  ``f`` is fixed by
    ``[model] guillot_f`` (default 0.25, the planet-wide average of the
    irradiation; Guillot 2010 uses ½ for the day side, ⅔ for the substellar point).
    """

    name = "guillot"
    parameter_names = ["t_int", "t_irr", "log_kappa_ir", "log_gamma", "log_g"]
    option_keys = ("guillot_f",)
    DEFAULT_F = 0.25

    def __init__(self, f: float = DEFAULT_F):
        self.f = float(f)

    @classmethod
    def from_options(cls, options, where):
        f = options.get("guillot_f", cls.DEFAULT_F)
        if isinstance(f, bool) or not isinstance(f, (int, float)) or not 0.0 < f <= 1.0:
            raise ConfigError(f"{where}: key 'guillot_f' must be a number in (0, 1], got {f!r}")
        return cls(f)

    def temperature(self, pressure_bar, params):
        tau = (10.0 ** params["log_kappa_ir"]) * np.asarray(pressure_bar) * (BAR_TO_DYN_CM2 / 10.0 ** params["log_g"])
        gamma = 10.0 ** params["log_gamma"]
        s3 = np.sqrt(3.0)
        t_int4 = float(params["t_int"]) ** 4
        t_irr4 = float(params["t_irr"]) ** 4
        irr = 2.0 / 3.0 + 1.0 / (gamma * s3) + (gamma / s3 - 1.0 / (gamma * s3)) * np.exp(-gamma * tau * s3)
        t4 = 0.75 * t_int4 * (2.0 / 3.0 + tau) + 0.75 * t_irr4 * self.f * irr
        return np.sqrt(np.sqrt(t4))


def _float_list(options: Mapping, key: str, where: str, minimum: int, noun: str = "pressures",
                unit: str = " in bar") -> np.ndarray:
    value = options.get(key)
    if value is None:
        raise ConfigError(f"{where}: profile needs key {key!r} (list of {noun}{unit})")
    if not isinstance(value, (list, tuple)) or not all(
            isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
        raise ConfigError(f"{where}: key {key!r} must be a list of numbers, got {value!r}")
    arr = np.asarray(value, dtype=np.float64)
    if arr.size < minimum or np.any(~np.isfinite(arr)) or np.any(arr <= 0) or np.any(np.diff(arr) <= 0):
        raise ConfigError(f"{where}: key {key!r} must hold at least {minimum} positive, strictly ascending {noun}")
    return arr


def _trapezoid_weights(x: np.ndarray) -> np.ndarray:
    """Weights w with w @ f = the trapezoid-rule integral of f over x."""
    w = np.zeros_like(x, dtype=np.float64)
    h = np.diff(x)
    w[:-1] += 0.5 * h
    w[1:] += 0.5 * h
    return w


def pchip_slopes(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Node derivatives of a monotone cubic Hermite interpolant (Fritsch & Carlson 1980, SIAM J. Numer. Anal. 17, 238).

    Start from the three-point average of the secants, zero them at local
    extrema and where a secant vanishes, then scale pairs so that
    α² + β² ≤ 9 (their sufficient condition for monotonicity).
    """
    h = np.diff(x)
    delta = np.diff(y) / h
    m = np.empty_like(y)
    m[0], m[-1] = delta[0], delta[-1]
    m[1:-1] = 0.5 * (delta[:-1] + delta[1:])
    m[1:-1][delta[:-1] * delta[1:] <= 0.0] = 0.0
    for k in range(delta.size):  # a handful of knots: a loop is clearer than masks
        if delta[k] == 0.0:
            m[k] = m[k + 1] = 0.0
            continue
        a, b = m[k] / delta[k], m[k + 1] / delta[k]
        if a < 0.0:
            m[k] = a = 0.0
        if b < 0.0:
            m[k + 1] = b = 0.0
        r = a * a + b * b
        if r > 9.0:
            t = 3.0 / np.sqrt(r)
            m[k], m[k + 1] = t * a * delta[k], t * b * delta[k]
    return m


def pchip_evaluate(x: np.ndarray, y: np.ndarray, m: np.ndarray, xq: np.ndarray) -> np.ndarray:
    """Cubic Hermite interpolation with node slopes ``m``; constant beyond the end nodes."""
    xq = np.clip(xq, x[0], x[-1])
    k = np.clip(np.searchsorted(x, xq, side="right") - 1, 0, x.size - 2)
    h = x[k + 1] - x[k]
    t = (xq - x[k]) / h
    t2, t3 = t * t, t * t * t
    return ((2 * t3 - 3 * t2 + 1) * y[k] + (t3 - 2 * t2 + t) * h * m[k]
            + (-2 * t3 + 3 * t2) * y[k + 1] + (t3 - t2) * h * m[k + 1])


class _KnotTemperatures(TPProfile):
    """Free temperatures ``t_knot_i`` at knots placed by :meth:`knot_log_pressures`.

    Monotone piecewise-cubic (PCHIP, Fritsch–Carlson) interpolation in log10 P,
    so the profile never overshoots the knot temperatures; constant beyond the
    first and last knot.  Subclasses say where the knots sit.
    """

    def _name_knots(self, n: int, extra: Sequence[str] = ()) -> None:
        self._knots = [f"t_knot_{i}" for i in range(n)]
        self.parameter_names = self._knots + list(extra)

    def knot_log_pressures(self, params: Mapping[str, float]) -> np.ndarray:
        """log10 of the knot pressures (bar), ascending."""
        raise NotImplementedError

    def knot_pressures_for(self, params: Mapping[str, float]) -> np.ndarray:
        """Knot pressures (bar) for ``params``."""
        return 10.0 ** self.knot_log_pressures(params)

    def temperature(self, pressure_bar, params):
        y = np.array([params[n] for n in self._knots], dtype=np.float64)
        x = self.knot_log_pressures(params)
        return pchip_evaluate(x, y, pchip_slopes(x, y), np.log10(pressure_bar))


class KnotsProfile(_KnotTemperatures):
    """Free temperatures ``t_knot_i`` at ``knot_pressures_bar`` (interpolation: :class:`_KnotTemperatures`)."""

    name = "knots"
    option_keys = ("knot_pressures_bar",)

    def __init__(self, knot_pressures_bar: Sequence[float]):
        self.knot_pressures_bar = np.asarray(knot_pressures_bar, dtype=np.float64)
        self._x = np.log10(self.knot_pressures_bar)
        self._name_knots(self._x.size)

    @classmethod
    def from_options(cls, options, where):
        return cls(_float_list(options, "knot_pressures_bar", where, minimum=2))

    def knot_log_pressures(self, params):
        return self._x


class ColumnKnotsProfile(_KnotTemperatures):
    """Free temperatures ``t_knot_i`` at fixed column masses ``knot_columns_g_cm2``.

    The column mass above a level is m = P / g in hydrostatic equilibrium
    (Mihalas 1978, *Stellar Atmospheres*, §7-2), so the knot pressures move
    with gravity: P_i = m_i · 10^log_g.  Interpolation as in the ``knots``
    profile (PCHIP in log P, constant beyond the end knots).

    Why: a molecular optical depth is τ = κ X m, so a spectrum fixes X and
    T(m) far better than it fixes g.  With knots at fixed pressures, a change
    of g along that degeneracy must be absorbed by raising every abundance
    and sliding the whole profile in log P, which the knot temperatures can
    only follow along a long, curved ridge.  In column-mass coordinates the
    same degeneracy is a nearly straight line in (log g, log X), which
    ensemble samplers cross quickly (see README, "Degenerate and multimodal
    posteriors").  g remains constrained by pressure-dependent opacity
    (collision-induced absorption, τ ∝ m² g; H⁻).
    """

    name = "column-knots"
    option_keys = ("knot_columns_g_cm2",)

    def __init__(self, knot_columns_g_cm2: Sequence[float]):
        self.knot_columns_g_cm2 = np.asarray(knot_columns_g_cm2, dtype=np.float64)
        self._log_m = np.log10(self.knot_columns_g_cm2 / BAR_TO_DYN_CM2)   # log10(P_bar) − log_g
        self._name_knots(self._log_m.size, ["log_g"])

    @classmethod
    def from_options(cls, options, where):
        return cls(_float_list(options, "knot_columns_g_cm2", where, minimum=2, noun="column masses", unit=" in g cm⁻²"))

    def knot_log_pressures(self, params):
        return self._log_m + float(params["log_g"])


class OpticalDepthKnotsProfile(_KnotTemperatures):
    """Free temperatures ``t_knot_i`` at fixed grey optical depths ``knot_optical_depths``.

    The grey optical depth above a level is τ = κ̄ P / g with the grey mass
    opacity κ̄ = Σ_i x_i σ̄_i / (μ m_u) of the free-chemistry absorbers
    (vertically constant VMRs x_i, mean molecular weight μ).  σ̄_i is each
    absorber's Planck-weighted mean cross section over the model's wavelength
    grid at ``REFERENCE_T_K`` and the level nearest ``REFERENCE_P_BAR`` (a
    fixed number per species, computed once in :meth:`bind`).  The knots
    therefore sit at P_k = τ_k g / κ̄ and move with gravity and abundances;
    interpolation as in the ``knots`` profile (PCHIP in log P, constant beyond
    the end knots).

    Why: T as a function of optical depth is what an emission spectrum
    measures (the classical T(τ) relation, e.g. Mihalas 1978, *Stellar
    Atmospheres*, ch. 3).  Scaling every abundance by a factor a, or g by 1/a,
    leaves the molecular τ(P) profile unchanged up to a shift in log P, so
    with knots at fixed pressures the posterior follows that shift along a
    long curved ridge in (log g, log x, T_knots).  With knots at fixed τ the
    same degeneracy is a straight line in (log g, log x) with the knot
    temperatures fixed.  κ̄ is a coordinate, not the model's opacity: the
    spectrum is computed with the full opacity as for every other profile.
    """

    name = "tau-knots"
    option_keys = ("knot_optical_depths",)
    REFERENCE_T_K = 1500.0
    REFERENCE_P_BAR = 1.0

    def __init__(self, knot_optical_depths: Sequence[float]):
        self.knot_optical_depths = np.asarray(knot_optical_depths, dtype=np.float64)
        self._log_tau = np.log10(self.knot_optical_depths)
        self._name_knots(self._log_tau.size, ["log_g"])
        self._chemistry = None
        self._sigma = None

    @classmethod
    def from_options(cls, options, where):
        return cls(_float_list(options, "knot_optical_depths", where, minimum=2, noun="optical depths", unit=""))

    def bind(self, model) -> None:
        from ..radiative_transfer import planck_lambda

        self._chemistry = model.chemistry
        wl = model.wavelength_um
        t_lo, t_hi = model.molecular.t_range
        t_ref = min(max(self.REFERENCE_T_K, t_lo), t_hi)
        level = int(np.argmin(np.abs(np.log(model.pressure_bar / self.REFERENCE_P_BAR))))
        sigma = np.array(model.molecular.cross_sections(np.full(model.pressure_bar.size, t_ref))[level],
                         dtype=np.float64)                                   # (n_species, n_w[, n_g])
        if sigma.ndim == 3:
            sigma = sigma @ model.g_weights
        weight = planck_lambda(wl, t_ref) * _trapezoid_weights(wl)
        self._sigma = sigma @ (weight / weight.sum())

    def reference_cross_sections(self) -> dict[str, float]:
        """σ̄ per absorber (cm² molecule⁻¹), after :meth:`bind`."""
        return dict(zip(self._chemistry.absorbers, self._sigma.tolist()))

    def grey_opacity(self, params: Mapping[str, float]) -> float:
        """κ̄ in cm² g⁻¹ for the abundances in ``params``."""
        if self._sigma is None:
            raise RuntimeError("tau-knots profile used before bind(model)")
        comp = self._chemistry.evaluate(params, 1)
        return float(comp.absorber_vmr @ self._sigma) / (float(comp.mmw_amu[0]) * AMU_CGS)

    def knot_log_pressures(self, params):
        log_m = self._log_tau - np.log10(self.grey_opacity(params))          # column mass, g cm⁻²
        return log_m + float(params["log_g"]) - np.log10(BAR_TO_DYN_CM2)


class GradientProfile(TPProfile):
    """T at the deepest level (``t_deep``) and constant d ln T / d ln P per band.

    ``gradient_pressures_bar`` (n+1 ascending pressures) delimits n bands;
    ``dlnt_dlnp_i`` is the gradient in band i (band 0 is the lowest-pressure
    one).  The first and last band extend to the top and bottom of the
    atmosphere.  Integrated upward from the deepest level:
    ln T(P) = ln t_deep − ∫_{ln P}^{ln P_deep} (d ln T / d ln P) d ln P,
    so T is an exact power law of P within each band.
    """

    name = "gradient"
    option_keys = ("gradient_pressures_bar",)

    def __init__(self, gradient_pressures_bar: Sequence[float]):
        self.gradient_pressures_bar = np.asarray(gradient_pressures_bar, dtype=np.float64)
        self._edges = np.log(self.gradient_pressures_bar)
        n = self._edges.size - 1
        self.parameter_names = ["t_deep"] + [f"dlnt_dlnp_{i}" for i in range(n)]
        self._cache_key = None
        self._weights = None

    @classmethod
    def from_options(cls, options, where):
        return cls(_float_list(options, "gradient_pressures_bar", where, minimum=2))

    def _band_lengths(self, pressure_bar: np.ndarray) -> np.ndarray:
        """(n_levels, n_bands): length in ln P of each band between a level and the deepest level."""
        key = (pressure_bar.size, float(pressure_bar[0]), float(pressure_bar[-1]))
        if key == self._cache_key:
            return self._weights
        lnp = np.log(pressure_bar)
        lo = np.concatenate(([-np.inf], self._edges[1:-1]))
        hi = np.concatenate((self._edges[1:-1], [np.inf]))
        top = np.maximum(lnp[:, None], lo[None, :])
        bottom = np.minimum(lnp[-1], hi)[None, :]
        self._weights = np.clip(bottom - top, 0.0, None)
        self._cache_key = key
        return self._weights

    def temperature(self, pressure_bar, params):
        pressure_bar = np.asarray(pressure_bar, dtype=np.float64)
        grads = np.array([params[n] for n in self.parameter_names[1:]], dtype=np.float64)
        return float(params["t_deep"]) * np.exp(-(self._band_lengths(pressure_bar) @ grads))


#: ``[model] profile`` name -> profile class; add new profiles here (see DEVELOPERS.md).
PROFILES: dict[str, type[TPProfile]] = {
    cls.name: cls for cls in (IsothermalProfile, GuillotProfile, KnotsProfile, ColumnKnotsProfile,
                                OpticalDepthKnotsProfile, GradientProfile)
}


def build_profile(name: str, options: Mapping, where: str) -> TPProfile:
    """Instantiate the profile registered as ``name`` from the ``[model]`` options."""
    from ..config_keys import suggest

    if name not in PROFILES:
        raise ConfigError(f"{where}: unknown profile {name!r}{suggest(name, PROFILES)}; "
                          f"choose one of {sorted(PROFILES)}")
    return PROFILES[name].from_options(options, where)
