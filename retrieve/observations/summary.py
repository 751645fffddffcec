"""One-paragraph summaries of datasets (used by ``retrieve describe``)."""
from __future__ import annotations

import numpy as np

from .dataset import Dataset


def summarize_dataset(dataset: Dataset) -> dict:
    """Key numbers of a dataset.

    Returns
    -------
    dict
        ``name``, ``kind``, ``n_points``, ``wavelength_min_um``, ``wavelength_max_um``,
        ``median_snr`` (median of flux / σ, σ from the covariance diagonal if
        present), ``resolving_power`` (float, ``(min, max)`` for per-channel
        values, or None), ``has_covariance``, ``filters`` and ``source``.
    """
    sigma = np.sqrt(dataset.variance())
    rp = dataset.resolving_power
    if rp is not None and np.ndim(rp) == 1:
        rp = (float(np.min(rp)), float(np.max(rp)))
    elif rp is not None:
        rp = float(rp)
    return {
        "name": dataset.name, "kind": dataset.kind, "n_points": dataset.n_points,
        "wavelength_min_um": float(np.min(dataset.wavelength_um)),
        "wavelength_max_um": float(np.max(dataset.wavelength_um)),
        "median_snr": float(np.median(dataset.flux / sigma)),
        "resolving_power": rp, "has_covariance": dataset.covariance is not None,
        "filters": list(dataset.filters) if dataset.filters else None,
        "source": str(dataset.source) if dataset.source is not None else None,
    }


def format_summary(summary: dict) -> str:
    """Human-readable lines for :func:`summarize_dataset` output."""
    rp = summary["resolving_power"]
    if rp is None:
        rp_text = "unknown"
    elif isinstance(rp, tuple):
        rp_text = f"{rp[0]:.4g}-{rp[1]:.4g} (per channel)"
    else:
        rp_text = f"{rp:.4g}"
    lines = [
        f"{summary['source'] or summary['name']}",
        f"  name             {summary['name']}",
        f"  kind             {summary['kind']}",
        f"  points           {summary['n_points']}",
        f"  wavelength       {summary['wavelength_min_um']:.4g}-{summary['wavelength_max_um']:.4g} um",
        f"  median S/N       {summary['median_snr']:.3g}",
        f"  resolving power  {rp_text}",
        f"  covariance       {'yes' if summary['has_covariance'] else 'no'}",
    ]
    if summary["filters"]:
        lines.append(f"  filters          {', '.join(summary['filters'])}")
    return "\n".join(lines)
