"""Flagged bands: where in the spectrum does each molecule's signal sit, and how strongly?

For posterior draws θₖ the model is evaluated twice: as fitted, and with the
molecule removed (its ``log_vmr`` set to :data:`NEGLIGIBLE_LOG_VMR`, every other
parameter unchanged; flux-scale factors applied to both).  In each catalogued
band, with the channels B it covers (a spectral channel counts when at least
half of it lies in the band window; a photometric point when its effective
wavelength does) and the data covariance C_B of those channels (the noise
model at the posterior-median hyperparameters: error inflation and the
correlated-noise kernel included),

    χ²ₖ = Δₖᵀ C_B⁻¹ Δₖ,      Δₖ = m_full(θₖ) − m_reduced(θₖ)   on B,

summed over datasets.  The band's statistic is the median χ² over the draws;
with |B| degrees of freedom its upper-tail probability p = P(χ²_|B| ≥ χ²)
gives the two-tailed equivalent significance σ = Φ⁻¹(1 − p/2).  Flags:
``detected`` (σ ≥ 3), ``tentative`` (2 ≤ σ < 3), ``not detected`` (σ < 2),
``not covered`` (no channel in the band).

This measures how distinguishable the molecule's imprint is against the
noise in that band, assuming the rest of the model stays fixed; it is not a
refit without the molecule (that is the Bayes factor's job), so the other
parameters cannot compensate here.  ``channels`` lists, per dataset, the
0-based channel indices in the band where the median |Δ| is at least the
channel's 1σ uncertainty, e.g. ``"ifs:12-14,17"``.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
from scipy import linalg, special, stats

from ..errors import ModelEvaluationError
from .significance import sigma_from_log_p

NEGLIGIBLE_LOG_VMR = -30.0
DETECTED_SIGMA = 3.0
TENTATIVE_SIGMA = 2.0
MIN_CHANNEL_FRACTION = 0.5


@dataclasses.dataclass
class BandFlag:
    """One row of ``bands.ecsv``."""

    molecule: str
    band: str
    center_um: float
    window_lo_um: float
    window_hi_um: float
    flag: str
    significance_sigma: float
    chi2: float
    n_channels: int
    channels: str
    sigma_p16: float = math.nan
    sigma_p84: float = math.nan


def flag_of(sigma: float, n_channels: int) -> str:
    """Flag word for a band significance."""
    if n_channels == 0:
        return "not covered"
    if sigma >= DETECTED_SIGMA:
        return "detected"
    if sigma >= TENTATIVE_SIGMA:
        return "tentative"
    return "not detected"


def chi2_log_sf(chi2, dof):
    """ln P(χ²_dof ≥ chi2), with the large-x form of the upper incomplete gamma function where scipy underflows.

    Q(s, x) = Γ(s, x)/Γ(s) ≈ x^(s−1) e^(−x) / Γ(s) (1 + (s−1)/x) for x ≫ s (Abramowitz & Stegun 1964, 6.5.32),
    with s = dof/2 and x = chi2/2.
    """
    chi2 = np.asarray(chi2, dtype=float)
    with np.errstate(divide="ignore"):
        out = np.asarray(stats.chi2.logsf(chi2, dof), dtype=float)
    s, x = 0.5 * dof, 0.5 * np.maximum(chi2, 1e-300)
    asym = (s - 1.0) * np.log(x) - x - special.gammaln(s) + np.log1p((s - 1.0) / x)
    out = np.where(np.isneginf(out), asym, out)
    return out[()] if out.ndim == 0 else out


def chi2_sigma(chi2, dof):
    """Two-tailed equivalent σ of a χ² value with ``dof`` degrees of freedom (stable in the far tail)."""
    return sigma_from_log_p(chi2_log_sf(chi2, dof))


def band_channels(dataset, band) -> np.ndarray:
    """0-based indices of the dataset's points inside a band (rule in the module docstring)."""
    lo, hi = band.window_lo_um, band.window_hi_um
    if dataset.kind != "spectrum":
        wl = np.asarray(dataset.wavelength_um, dtype=float)
        return np.flatnonzero((wl >= lo) & (wl <= hi))
    from ..instrument.operator import channel_edges
    edges = channel_edges(dataset)
    overlap = np.clip(np.minimum(edges[:, 1], hi) - np.maximum(edges[:, 0], lo), 0.0, None)
    return np.flatnonzero(overlap >= MIN_CHANNEL_FRACTION * (edges[:, 1] - edges[:, 0]))


def format_channels(per_dataset: dict) -> str:
    """``{"ifs": [12, 13, 14, 17]}`` → ``"ifs:12-14,17"`` (datasets separated by ``;``)."""
    parts = []
    for name, idx in per_dataset.items():
        idx = sorted(int(i) for i in idx)
        if not idx:
            continue
        runs, start, prev = [], idx[0], idx[0]
        for i in idx[1:] + [None]:
            if i is not None and i == prev + 1:
                prev = i
                continue
            runs.append(f"{start}" if start == prev else f"{start}-{prev}")
            if i is not None:
                start = prev = i
        parts.append(f"{name}:{','.join(runs)}")
    return ";".join(parts)


# --------------------------------------------------------------------------- model draws
def _hyper_of(term, params) -> dict:
    hyper = {}
    if term.inflate:
        hyper["log_inflate"] = params[f"log_inflate_{term.name}"]
    if term.correlated:
        hyper.update(gp_amp=params[f"gp_amp_{term.name}"], gp_length_um=params[f"gp_length_um_{term.name}"])
    return hyper


def _scaled(post, params, output) -> dict:
    return {t.name: np.asarray(output.per_dataset[t.name], dtype=float) *
            (params[f"scale_{t.name}"] if t.scale else 1.0) for t in post.terms}


def model_differences(post, theta_draws: np.ndarray, molecules) -> tuple[dict, list[dict]]:
    """Full-minus-reduced model differences per molecule and dataset, for each usable draw.

    Returns
    -------
    diffs : dict molecule -> dict dataset -> ndarray (n_ok, n_points)
    params_used : list of dict
        The parameters of the draws that evaluated (for the noise hyperparameters).
    """
    diffs = {m: {t.name: [] for t in post.terms} for m in molecules}
    used = []
    for theta in theta_draws:
        params = post.params(theta)
        try:
            with np.errstate(all="ignore"):
                full = _scaled(post, params, post.model_output(params))
                reduced = {m: _scaled(post, {**params, f"log_vmr_{m}": NEGLIGIBLE_LOG_VMR},
                                      post.model_output({**params, f"log_vmr_{m}": NEGLIGIBLE_LOG_VMR}))
                           for m in molecules}
        except ModelEvaluationError:
            continue
        used.append(params)
        for m in molecules:
            for name in full:
                diffs[m][name].append(full[name] - reduced[m][name])
    out = {m: {name: np.array(v) for name, v in d.items()} for m, d in diffs.items()}
    return out, used


def _band_covariances(post, params_used) -> dict:
    """Noise covariance per dataset at the median hyperparameters of the draws."""
    covs = {}
    for term in post.terms:
        hyper = {}
        if params_used:
            per = [_hyper_of(term, p) for p in params_used]
            hyper = {k: float(np.median([h[k] for h in per])) for k in per[0]}
        covs[term.name] = term.noise.covariance_matrix(**hyper)
    return covs


# --------------------------------------------------------------------------- flags
def flag_bands(object_data, diffs: dict, covariances: dict, bands, molecule: str) -> list[BandFlag]:
    """Flag each band of ``molecule`` from model differences (see module docstring).

    Parameters
    ----------
    object_data : ObjectData
    diffs : dict dataset -> ndarray (n_draws, n_points)
        Full-minus-reduced model per draw.
    covariances : dict dataset -> ndarray (n_points, n_points)
    bands : sequence of Band
        The molecule's catalogue bands.
    molecule : str
    """
    rows = []
    for band in bands:
        chi2_draws, n_ch, carrying = None, 0, {}
        for ds in object_data.datasets:
            d = diffs.get(ds.name)
            idx = band_channels(ds, band)
            if d is None or d.size == 0 or idx.size == 0:
                continue
            cov = covariances[ds.name][np.ix_(idx, idx)]
            chol = linalg.cholesky(cov, lower=True)
            z = linalg.solve_triangular(chol, d[:, idx].T, lower=True)
            c2 = np.sum(z * z, axis=0)
            chi2_draws = c2 if chi2_draws is None else chi2_draws + c2
            n_ch += idx.size
            med = np.median(d[:, idx], axis=0)
            strong = idx[np.abs(med) >= np.sqrt(np.diag(cov))]
            carrying[ds.name] = strong
        if chi2_draws is None:
            rows.append(BandFlag(molecule, band.band, band.center_um, band.window_lo_um, band.window_hi_um,
                                 "not covered", math.nan, math.nan, 0, ""))
            continue
        chi2 = float(np.median(chi2_draws))
        sigma = float(chi2_sigma(chi2, n_ch))
        s16, s84 = (float(v) for v in chi2_sigma(np.percentile(chi2_draws, [16, 84]), n_ch))
        rows.append(BandFlag(molecule, band.band, band.center_um, band.window_lo_um, band.window_hi_um,
                             flag_of(sigma, n_ch), sigma, chi2, n_ch, format_channels(carrying), s16, s84))
    return rows


def band_flags_of_run(post, samples, molecules, catalogue, n_draws: int = 60, seed: int = 0) -> list[BandFlag]:
    """Band flags of every molecule of a fit, from ``n_draws`` posterior draws.

    Parameters
    ----------
    post : retrieve.inference.likelihood.LogPosterior
    samples : Table or mapping
        Posterior samples (columns ``post.param_names``).
    molecules : sequence of str
    catalogue : sequence of Band
    n_draws, seed : int
        Draws used (without replacement, seeded).

    Returns
    -------
    list of BandFlag
    """
    x = np.column_stack([np.asarray(samples[n], dtype=float) for n in post.param_names])
    rng = np.random.default_rng(seed)
    pick = rng.choice(x.shape[0], size=min(int(n_draws), x.shape[0]), replace=False)
    diffs, used = model_differences(post, x[pick], list(molecules))
    covs = _band_covariances(post, used)
    lo, hi = post.object_data.wavelength_range_um
    rows = []
    for m in molecules:
        bands = [b for b in catalogue if b.molecule == m and b.window_hi_um > lo and b.window_lo_um < hi]
        rows += flag_bands(post.object_data, diffs[m], covs, bands, m)
    return rows
