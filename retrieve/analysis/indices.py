"""Model-independent spectral indices (band depths) from the data alone.

An index is the ratio of the mean flux density in a *numerator* window
(inside the band) to the mean flux density of a *denominator* (reference):

    I = ⟨F⟩_num / ⟨F⟩_den,     ⟨F⟩_W = Σᵢ oᵢ Fᵢ / Σᵢ oᵢ,

where oᵢ is the overlap (µm) of channel i (its edges, or midpoints between
centres) with the window W — at R ≈ 40 a window spans only a few channels,
so partial channels count by their overlap.  A flat spectrum gives I = 1;
an absorption that removes a fraction d of the numerator window's flux gives
I = 1 − d.  When the denominator has two windows and ``interpolate`` is set
(catalogue band depths), the reference is the straight line through the two
windows' mean fluxes, evaluated at the numerator's centre.

Built-in definitions: the near-infrared indices of Burgasser et al. (2006,
ApJ 637, 1067, Table 3), whose numerator and denominator windows have equal
widths, so the ratio of mean fluxes equals their ratio of integrated fluxes.
The window limits below are recalled (value from memory).  A window must be
covered by the spectrum's channels to at least :data:`MIN_COVERAGE` of its
width, else the index is NaN.

Uncertainties: Monte Carlo over the noise — draws F + L z with L the Cholesky
factor of the dataset covariance (or the diagonal), z standard normal, from a
seeded :class:`numpy.random.Generator`; the quoted error is the standard
deviation of the index over the draws.  Both ``⟨F⟩`` are linear in F, so the
draws need only the channels the windows touch.
"""
from __future__ import annotations

import dataclasses
import math
import re

import numpy as np
from scipy import linalg

from ..errors import UserError

MIN_COVERAGE = 0.9
DEFAULT_DRAWS = 4000


@dataclasses.dataclass(frozen=True)
class IndexDefinition:
    """A spectral index.

    Attributes
    ----------
    name : str
        Column-friendly name (e.g. ``"h2o_j"``).
    numerator, denominator : tuple of (lo, hi)
        Windows in µm.
    molecule : str
    source : str
    interpolate : bool
        With two denominator windows: interpolate the reference linearly to
        the numerator centre instead of averaging the windows together.
    """

    name: str
    numerator: tuple
    denominator: tuple
    molecule: str = ""
    source: str = ""
    interpolate: bool = False

    @property
    def label(self) -> str:
        return self.name


_B06 = "Burgasser et al. (2006, ApJ 637, 1067), Table 3; windows value from memory"
BURGASSER_2006 = (
    IndexDefinition("h2o_j", ((1.14, 1.165),), ((1.26, 1.285),), "H2O", _B06),
    IndexDefinition("ch4_j", ((1.315, 1.34),), ((1.26, 1.285),), "CH4", _B06),
    IndexDefinition("h2o_h", ((1.48, 1.52),), ((1.56, 1.60),), "H2O", _B06),
    IndexDefinition("ch4_h", ((1.635, 1.675),), ((1.56, 1.60),), "CH4", _B06),
    IndexDefinition("h2o_k", ((1.975, 1.995),), ((2.08, 2.10),), "H2O", _B06),
    IndexDefinition("ch4_k", ((2.215, 2.255),), ((2.08, 2.12),), "CH4", _B06),
)


def from_band(band) -> IndexDefinition:
    """Index of a catalogue band: mean flux in its window over its continuum windows (interpolated)."""
    if not band.continuum_um:
        raise UserError(f"band {band.band} of {band.molecule} has no continuum windows; add continuum_um")
    name = f"{band.molecule.lower()}_{band.band.replace('.', 'p')}"
    return IndexDefinition(name, ((band.window_lo_um, band.window_hi_um),), tuple(band.continuum_um),
                           band.molecule, band.source, interpolate=len(band.continuum_um) == 2)


_SPEC = re.compile(r"^([A-Za-z][A-Za-z0-9_]*)[:=]([0-9.eE+\-,\s]+)/([0-9.eE+\-,\s]+)$")


def parse_index_spec(text: str) -> IndexDefinition:
    """User index from ``NAME:NUM_LO-NUM_HI/DEN_LO-DEN_HI`` (µm; several windows separated by commas).

    Example: ``"h2o_wide:1.33-1.37/1.26-1.29"``.
    """
    m = _SPEC.match(text.strip())
    if not m:
        raise UserError(f"--index {text!r}: expected NAME:LO-HI/LO-HI in µm, e.g. h2o_wide:1.33-1.37/1.26-1.29")

    def windows(part):
        out = []
        for w in part.split(","):
            bits = re.fullmatch(r"\s*([0-9.eE+]+)\s*-\s*([0-9.eE+]+)\s*", w)
            if not bits:
                raise UserError(f"--index {text!r}: window {w!r} is not LO-HI")
            lo, hi = float(bits.group(1)), float(bits.group(2))
            if not 0 < lo < hi:
                raise UserError(f"--index {text!r}: window {w!r} needs 0 < LO < HI")
            out.append((lo, hi))
        return tuple(out)
    return IndexDefinition(m.group(1), windows(m.group(2)), windows(m.group(3)), source="user-defined")


# --------------------------------------------------------------------------- linear weights
def overlap_weights(edges: np.ndarray, windows) -> tuple[np.ndarray, float]:
    """Overlap (µm) of each channel with the union of ``windows``, and the fraction of the windows covered."""
    edges = np.asarray(edges, dtype=float)
    w = np.zeros(edges.shape[0])
    total = 0.0
    for lo, hi in windows:
        w += np.clip(np.minimum(edges[:, 1], hi) - np.maximum(edges[:, 0], lo), 0.0, None)
        total += hi - lo
    # channels may overlap each other slightly; coverage counts window length once
    covered = sum(_covered_length(edges, lo, hi) for lo, hi in windows)
    return w, covered / total


def _covered_length(edges, lo, hi) -> float:
    seg = np.clip(edges, lo, hi)
    seg = seg[seg[:, 1] > seg[:, 0]]
    if seg.size == 0:
        return 0.0
    seg = seg[np.argsort(seg[:, 0])]
    length, cur_lo, cur_hi = 0.0, seg[0, 0], seg[0, 1]
    for a, b in seg[1:]:
        if a > cur_hi:
            length += cur_hi - cur_lo
            cur_lo, cur_hi = a, b
        else:
            cur_hi = max(cur_hi, b)
    return length + cur_hi - cur_lo


def index_weights(edges: np.ndarray, definition: IndexDefinition) -> tuple[np.ndarray, np.ndarray] | None:
    """Vectors (a, b) with I = a·F / b·F, or None when a window is not covered."""
    a, cov_a = overlap_weights(edges, definition.numerator)
    if cov_a < MIN_COVERAGE or a.sum() <= 0:
        return None
    a = a / a.sum()
    if definition.interpolate and len(definition.denominator) == 2:
        parts = []
        for win in definition.denominator:
            w, cov = overlap_weights(edges, (win,))
            if cov < MIN_COVERAGE or w.sum() <= 0:
                return None
            parts.append(w / w.sum())
        (l1, h1), (l2, h2) = definition.denominator
        c1, c2 = 0.5 * (l1 + h1), 0.5 * (l2 + h2)
        c = np.mean([0.5 * (lo + hi) for lo, hi in definition.numerator])
        f2 = (c - c1) / (c2 - c1)                        # Lagrange weights of the two window centres
        return a, (1.0 - f2) * parts[0] + f2 * parts[1]
    b, cov_b = overlap_weights(edges, definition.denominator)
    if cov_b < MIN_COVERAGE or b.sum() <= 0:
        return None
    return a, b / b.sum()


# --------------------------------------------------------------------------- measurement
@dataclasses.dataclass
class IndexValue:
    """An index measured on one spectrum: value at the data, Monte Carlo error and percentiles."""

    name: str
    value: float
    err: float
    p16: float
    p84: float
    n_draws: int


def _noise_factor(dataset, idx: np.ndarray) -> np.ndarray:
    """Lower Cholesky factor of the noise covariance restricted to channels ``idx``."""
    if dataset.covariance is not None:
        sub = np.asarray(dataset.covariance, dtype=float)[np.ix_(idx, idx)]
        try:
            return linalg.cholesky(sub, lower=True)
        except linalg.LinAlgError:
            where = dataset.source or dataset.name
            raise UserError(f"{where}: covariance is not positive definite over channels "
                            f"{idx.min()}-{idx.max()}; check the covariance file") from None
    return np.diag(np.sqrt(np.asarray(dataset.variance(), dtype=float)[idx]))


def measure_index(dataset, definition: IndexDefinition, n_draws: int = DEFAULT_DRAWS,
                  rng: np.random.Generator | None = None, seed: int = 0) -> IndexValue:
    """Index of one spectrum with its Monte Carlo uncertainty (NaN where the windows are not covered).

    Parameters
    ----------
    dataset : retrieve.observations.Dataset
        A spectrum (photometry has no index).
    definition : IndexDefinition
    n_draws : int
        Noise realisations.
    rng, seed
        Random generator (or seed for one).

    Returns
    -------
    IndexValue
    """
    from ..instrument.operator import channel_edges
    nan = IndexValue(definition.name, math.nan, math.nan, math.nan, math.nan, 0)
    if dataset.kind != "spectrum":
        return nan
    weights = index_weights(channel_edges(dataset), definition)
    if weights is None:
        return nan
    a, b = weights
    idx = np.flatnonzero((a != 0) | (b != 0))
    flux = np.asarray(dataset.flux, dtype=float)[idx]
    a, b = a[idx], b[idx]
    value = float(a @ flux / (b @ flux))
    rng = rng if rng is not None else np.random.default_rng(seed)
    draws = flux + rng.standard_normal((n_draws, idx.size)) @ _noise_factor(dataset, idx).T
    ratio = (draws @ a) / (draws @ b)
    p16, p84 = np.percentile(ratio, [16, 84])
    return IndexValue(definition.name, value, float(np.std(ratio, ddof=1)), float(p16), float(p84), n_draws)


def index_of_model(model_flux: np.ndarray, dataset, definition: IndexDefinition) -> np.ndarray:
    """Index of model spectra on a dataset's channels (rows of ``model_flux``); NaN if not covered."""
    from ..instrument.operator import channel_edges
    weights = index_weights(channel_edges(dataset), definition)
    m = np.atleast_2d(np.asarray(model_flux, dtype=float))
    if weights is None:
        return np.full(m.shape[0], math.nan)
    a, b = weights
    return (m @ a) / (m @ b)


# --------------------------------------------------------------------------- tables of many objects
def _object_name(dataset) -> str:
    meta = dataset.meta or {}
    for key in ("object", "object_name", "name"):
        if isinstance(meta.get(key), str) and meta[key].strip():
            return meta[key].strip()
    return dataset.source.stem if dataset.source is not None else dataset.name


def data_index_row(dataset, definitions, n_draws: int = DEFAULT_DRAWS, seed: int = 0, name: str | None = None) -> dict:
    """``{name, file, source="data", <index>, <index>_err, ...}`` of one spectrum."""
    rng = np.random.default_rng(seed)
    row = {"name": name or _object_name(dataset), "file": str(dataset.source or ""), "source": "data"}
    for d in definitions:
        v = measure_index(dataset, d, n_draws=n_draws, rng=rng)
        row[d.name], row[f"{d.name}_err"] = v.value, v.err
    return row


def model_index_rows(run, definitions, n_draws: int = 200, seed: int = 0) -> list[dict]:
    """Indices of a run's posterior model spectra: median and standard deviation over posterior draws.

    One row per spectroscopic dataset of the run (flux-scale factors applied).
    """
    from ..errors import ModelEvaluationError
    post = run.log_posterior
    s = run.samples
    x = np.column_stack([np.asarray(s[n], dtype=float) for n in post.param_names])
    rng = np.random.default_rng(seed)
    pick = rng.choice(x.shape[0], size=min(int(n_draws), x.shape[0]), replace=False)
    spectra = {t.name: [] for t in post.terms}
    for theta in x[pick]:
        params = post.params(theta)
        try:
            with np.errstate(all="ignore"):
                out = post.model_output(params)
        except ModelEvaluationError:
            continue
        for t in post.terms:
            spectra[t.name].append(np.asarray(out.per_dataset[t.name], float) *
                                   (params[f"scale_{t.name}"] if t.scale else 1.0))
    rows = []
    for ds in run.object_data.datasets:
        if ds.kind != "spectrum" or not spectra[ds.name]:
            continue
        m = np.array(spectra[ds.name])
        obj = run.manifest.get("object", "object")
        n_spec = sum(d.kind == "spectrum" for d in run.object_data.datasets)
        label = f"{obj} model" if n_spec == 1 else f"{obj} {ds.name} model"
        row = {"name": label, "file": str(run.run_dir), "source": "model"}
        for d in definitions:
            vals = index_of_model(m, ds, d)
            row[d.name] = float(np.median(vals))
            row[f"{d.name}_err"] = float(np.std(vals, ddof=1)) if vals.size > 1 else math.nan
        rows.append(row)
    return rows


def index_table(datasets, definitions=BURGASSER_2006, run=None, n_draws: int = DEFAULT_DRAWS,
                model_draws: int = 200, seed: int = 0, names=None):
    """Table of spectral indices: one row per spectrum, plus model rows when a run is given.

    Parameters
    ----------
    datasets : sequence of Dataset
        Spectra (one object each).
    definitions : sequence of IndexDefinition
    run : retrieve.inference.rundir.Run, optional
        Adds the indices of its posterior model spectra (``source = "model"``).
    n_draws, model_draws, seed
        Noise realisations per spectrum, posterior draws of the model, seed.
    names : sequence of str, optional
        Row labels of the spectra (default: ``object`` metadata, else the file stem).

    Returns
    -------
    astropy.table.Table
        Columns ``name``, ``file``, ``source``, then ``<index>`` and ``<index>_err`` per definition;
        meta holds each definition's windows and source.
    """
    from astropy.table import Table
    names = list(names) if names is not None else [None] * len(datasets)
    rows = [data_index_row(ds, definitions, n_draws, seed + i, name=nm)
            for i, (ds, nm) in enumerate(zip(datasets, names))]
    if run is not None:
        rows += model_index_rows(run, definitions, model_draws, seed)
    names = ["name", "file", "source"] + [c for d in definitions for c in (d.name, f"{d.name}_err")]
    table = Table(rows=[[r[c] for c in names] for r in rows], names=names) if rows else Table(names=names)
    table.meta["definition"] = "index = mean flux density in the numerator window(s) / reference (see meta windows)"
    table.meta["uncertainty"] = f"standard deviation over {n_draws} seeded noise realisations (covariance if given)"
    table.meta["windows"] = {d.name: {"numerator_um": [list(w) for w in d.numerator],
                                      "denominator_um": [list(w) for w in d.denominator],
                                      "interpolate": d.interpolate, "molecule": d.molecule, "source": d.source}
                             for d in definitions}
    return table
