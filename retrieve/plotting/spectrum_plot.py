"""Spectrum figure: data, best-fit model, posterior-predictive envelopes, residuals.

Upper panel: each data set with error bars (photometry as points with a
horizontal bar spanning the filter's half-maximum width), the best-fit model
and the 1σ / 2σ posterior-predictive envelopes (central 68.3 / 95.4 per cent
of model draws), optionally a high-resolution best-fit curve, and the bands
flagged by the identification step shaded and labelled by molecule.
Lower panel: residuals (data − best fit) in units of the data uncertainty.
"""
from __future__ import annotations

import dataclasses
import functools
from collections.abc import Mapping, Sequence

import numpy as np
from matplotlib.figure import Figure

from ..errors import UserError
from . import style

#: Central probability of the 1σ and 2σ intervals of a Gaussian (common practice, no source).
ONE_SIGMA = 0.682689
TWO_SIGMA = 0.954500

#: Values of a bands-table ``flag`` column that mean "shade this band".
PRESENT_FLAGS = {"present", "detected", "yes", "true", "1", "flagged"}
#: Values shaded more lightly, hatched, and labelled with a question mark.
TENTATIVE_FLAGS = {"tentative"}


@dataclasses.dataclass
class Envelope:
    """Posterior-predictive envelopes at the data points of one data set.

    ``lo1``/``hi1`` bound the central 68.3 %, ``lo2``/``hi2`` the central 95.4 %.
    """

    lo1: np.ndarray
    hi1: np.ndarray
    lo2: np.ndarray
    hi2: np.ndarray

    @classmethod
    def from_draws(cls, draws) -> "Envelope":
        """Envelopes from model draws of shape (n_draws, n_points)."""
        draws = np.atleast_2d(np.asarray(draws, dtype=float))
        q = np.quantile(draws, [(1 - TWO_SIGMA) / 2, (1 - ONE_SIGMA) / 2,
                                (1 + ONE_SIGMA) / 2, (1 + TWO_SIGMA) / 2], axis=0)
        return cls(lo1=q[1], hi1=q[2], lo2=q[0], hi2=q[3])


@functools.lru_cache(maxsize=64)
def filter_half_max_um(filter_name: str) -> tuple[float, float] | None:
    """Wavelengths (µm) where a speclite filter's response falls to half its peak.

    Returns None when speclite does not know the filter (the point is then
    drawn without a horizontal bar rather than failing the figure).
    """
    try:
        import speclite.filters
        response = speclite.filters.load_filter(filter_name)
    except (ValueError, OSError, KeyError):
        return None
    wave_um = np.asarray(response.wavelength, dtype=float) * 1e-4  # speclite stores Angstrom
    resp = np.asarray(response.response, dtype=float)
    above = np.flatnonzero(resp >= 0.5 * resp.max())
    return float(wave_um[above[0]]), float(wave_um[above[-1]])


def _photometry_xerr(dataset) -> np.ndarray | None:
    if not dataset.filters:
        return None
    xerr = np.zeros((2, dataset.n_points))
    for i, name in enumerate(dataset.filters):
        span = filter_half_max_um(name)
        if span is not None:
            xerr[0, i] = max(dataset.wavelength_um[i] - span[0], 0.0)
            xerr[1, i] = max(span[1] - dataset.wavelength_um[i], 0.0)
    return xerr


def _band_limits(row) -> tuple[float, float] | None:
    """Wavelength window of one bands-table row, whichever column names it uses."""
    for lo, hi in (("wavelength_min_um", "wavelength_max_um"), ("lo_um", "hi_um"),
                   ("window_lo_um", "window_hi_um"), ("start_um", "end_um"), ("lo", "hi")):
        if lo in row.colnames and hi in row.colnames:
            return float(row[lo]), float(row[hi])
    return None


def flagged_bands(bands, tentative: bool = False) -> list[tuple]:
    """``(molecule, band, lo_um, hi_um)`` of the rows of a bands table that are flagged.

    A row is flagged when its ``flag`` column is a true boolean or one of
    :data:`PRESENT_FLAGS`; rows without a wavelength window are skipped.
    With ``tentative`` the tuples get a fifth element, True for rows whose
    flag is in :data:`TENTATIVE_FLAGS` (those rows are then included too).
    """
    out = []
    if bands is None:
        return out
    for row in bands:
        flag = row["flag"] if "flag" in row.colnames else True
        is_tentative = False
        if isinstance(flag, (bool, np.bool_)):
            keep = bool(flag)
        else:
            word = str(flag).strip().lower()
            is_tentative = tentative and word in TENTATIVE_FLAGS
            keep = word in PRESENT_FLAGS or is_tentative
        limits = _band_limits(row)
        if keep and limits is not None:
            band = str(row["band"]) if "band" in row.colnames else ""
            item = (str(row["molecule"]), band, limits[0], limits[1])
            out.append(item + (is_tentative,) if tentative else item)
    return out


def _data_extent(datasets, margin_um: float = 0.04) -> tuple[float, float]:
    """Wavelength range covered by the channels and filter half-maximum widths, plus a margin."""
    lo, hi = np.inf, -np.inf
    for d in datasets:
        w = d.wavelength_um
        if d.kind == "photometry":
            xerr = _photometry_xerr(d)
            if xerr is not None:
                lo, hi = min(lo, float(np.min(w - xerr[0]))), max(hi, float(np.max(w + xerr[1])))
        if d.channel_edges_um is not None:
            lo, hi = min(lo, float(np.min(d.channel_edges_um))), max(hi, float(np.max(d.channel_edges_um)))
        lo, hi = min(lo, float(w.min())), max(hi, float(w.max()))
    return lo - margin_um, hi + margin_um


def _residual_sigma(dataset) -> np.ndarray:
    return np.sqrt(dataset.variance())


def plot_spectrum(datasets: Sequence, best_fit: Mapping[str, np.ndarray],
                  envelopes: Mapping[str, Envelope] | None = None, bands=None,
                  highres: tuple[np.ndarray, np.ndarray] | None = None,
                  title: str | None = None) -> Figure:
    """Data, best-fit model, envelopes and residuals of one object.

    Parameters
    ----------
    datasets : sequence of :class:`retrieve.observations.Dataset` (or an ObjectData)
    best_fit : mapping dataset name → ndarray (n_points,)
        Best-fit model at each data point, W m⁻² µm⁻¹ (flux scale factors applied).
    envelopes : mapping dataset name → :class:`Envelope`, optional
        Posterior-predictive envelopes; drawn with ``fill_between``.
    bands : astropy.table.Table, optional
        The identification step's bands table (``molecule``, ``band``, ``flag``
        and a wavelength window); flagged rows are shaded and labelled.
    highres : (wavelength_um, flux), optional
        Best-fit model on the model grid, drawn as a thin line behind the data.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        Axes 0 is the spectrum, axes 1 the residuals.
    """
    datasets = list(getattr(datasets, "datasets", datasets))
    missing = [d.name for d in datasets if d.name not in best_fit]
    if missing:
        raise UserError(f"spectrum figure: no best-fit model for data set(s) {missing}")
    envelopes = envelopes or {}
    factor, ylabel = style.flux_scale(np.concatenate([d.flux for d in datasets]))
    with style.house_style():
        fig = style.new_figure(figsize=(7.0, 4.8))
        ax, axr = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3.2, 1.0]})
        if highres is not None:
            w, f = (np.asarray(a, dtype=float) for a in highres)
            lo, hi = _data_extent(datasets)
            sel = (w >= lo) & (w <= hi)
            ax.plot(w[sel], f[sel] / factor, color=style.RUST, lw=0.4, alpha=0.3, zorder=0.5,
                    label="best fit (model grid)")
        for i, d in enumerate(datasets):
            _draw_dataset(ax, axr, d, np.asarray(best_fit[d.name], dtype=float), envelopes.get(d.name),
                          factor, first=(i == 0))
        _shade_bands(ax, axr, flagged_bands(bands, tentative=True))
        # the y range follows the data, models and envelopes, not spikes of the model-grid curve
        top = max(float(np.nanmax(np.concatenate([d.flux + _residual_sigma(d), best_fit[d.name]] +
                                                 ([envelopes[d.name].hi2] if d.name in envelopes else []))))
                  for d in datasets)
        bottom = min(float(np.nanmin(d.flux - _residual_sigma(d))) for d in datasets)
        ax.set_ylim(min(0.0, bottom / factor), 1.12 * top / factor)
        ax.set_xlim(*_data_extent(datasets))
        axr.axhline(0.0, color=style.INK, lw=0.7)
        for level in (-2, 2):
            axr.axhline(level, color=style.INK, lw=0.5, ls=":")
        ax.set_ylabel(ylabel)
        axr.set_ylabel(r"residual [$\sigma$]")
        axr.set_xlabel(r"wavelength [µm]")
        ax.legend(loc="best", ncols=2)
        if title:
            ax.set_title(title)
    return fig


def _draw_dataset(ax, axr, d, model, envelope, factor, first):
    w = d.wavelength_um
    sigma = _residual_sigma(d)
    if d.kind == "photometry":
        xerr = _photometry_xerr(d)
        ax.errorbar(w, d.flux / factor, yerr=sigma / factor, xerr=xerr, fmt="s", ms=5, color=style.LAGOON,
                    mfc="white", mew=1.2, capsize=0, lw=1.0, zorder=4, label=f"{d.name} (photometry)")
        if envelope is not None:  # predictive intervals as bars (the MAP model may lie outside them)
            ax.vlines(w, envelope.lo2 / factor, envelope.hi2 / factor, color=style.OCHRE, lw=7, alpha=0.3, zorder=2)
            ax.vlines(w, envelope.lo1 / factor, envelope.hi1 / factor, color=style.OCHRE, lw=7, alpha=0.6, zorder=2)
        ax.plot(w, model / factor, "D", ms=4, color=style.RUST, zorder=3,
                label="best fit" if first else None)
        axr.errorbar(w, (d.flux - model) / sigma, yerr=1.0, xerr=xerr, fmt="s", ms=4, color=style.LAGOON,
                     mfc="white", lw=0.8)
        return
    if envelope is not None:
        ax.fill_between(w, envelope.lo2 / factor, envelope.hi2 / factor, color=style.OCHRE, alpha=0.25,
                        lw=0, zorder=1, label=r"2$\sigma$ predictive" if first else None)
        ax.fill_between(w, envelope.lo1 / factor, envelope.hi1 / factor, color=style.OCHRE, alpha=0.55,
                        lw=0, zorder=1.5, label=r"1$\sigma$ predictive" if first else None)
    ax.errorbar(w, d.flux / factor, yerr=sigma / factor, fmt="o", ms=3, color=style.INK, lw=0.8,
                capsize=0, zorder=4, label=f"{d.name} data")
    ax.plot(w, model / factor, color=style.RUST, lw=1.4, zorder=3, label="best fit" if first else None)
    axr.errorbar(w, (d.flux - model) / sigma, yerr=1.0, fmt="o", ms=2.5, color=style.INK, lw=0.6)


def _shade_bands(ax, axr, bands):
    """Shade flagged bands (tentative ones lighter and hatched, labelled with "?")."""
    seen, placed = {}, []
    for molecule, band, lo, hi, tentative in bands:
        colour = seen.setdefault(molecule, style.molecule_colour(molecule, len(seen)))
        patch = ax.axvspan(lo, hi, facecolor=colour, alpha=0.08 if tentative else 0.16, lw=0, zorder=0,
                           hatch="///" if tentative else None, edgecolor=colour if tentative else None)
        patch.set_gid(f"band:{molecule}:{band}" + (":tentative" if tentative else ""))
        axr.axvspan(lo, hi, color=colour, alpha=0.06 if tentative else 0.12, lw=0, zorder=0)
        centre = 0.5 * (lo + hi)
        row = _label_row(placed, centre)
        placed.append((centre, row))
        ax.text(centre, 0.97 - 0.07 * row, style.molecule_tex(molecule) + ("?" if tentative else ""),
                transform=ax.get_xaxis_transform(), ha="center", va="top", fontsize=8, color=colour,
                fontweight="bold")


def _label_row(placed, centre: float, min_separation_um: float = 0.12) -> int:
    """Lowest label row with no earlier label within ``min_separation_um`` (labels must not overlap)."""
    row = 0
    while any(r == row and abs(c - centre) < min_separation_um for c, r in placed):
        row += 1
    return row
