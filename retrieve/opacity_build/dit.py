"""Fine-grid cross sections by the discrete integral transform (DIT).

Method (van den Bekerom & Pannier 2021, JQSRT 261, 107476, sec. 2): each
line's strength is split linearly between the two neighbouring grid points in
wavenumber and, in ln(width), between neighbouring points of a log-spaced
grid of Doppler widths and of Lorentz widths.  This gives one strength
histogram ("plane") per (Doppler, Lorentz) width pair; each plane is
convolved (FFT) with the Voigt profile of that width pair, truncated at the
wing cut-off, and the results are summed.  The cost grows with the number of
grid points and width pairs, not with the number of lines.

To keep few Doppler widths per plane (α_D ∝ ν), the grid is processed in
segments of ``BuildGrid.segment_points`` points, each padded by the cut-off
on both sides.  Width grids are global (w_k = exp(k h), with h =
``BuildGrid.doppler_step`` or ``BuildGrid.width_step``) so the Fourier
transforms of the kernels are reused across segments (LRU cache).  The
Doppler grid is finer than the Lorentz grid because blending two Gaussians
of different width errs most in their steep tails.  Kernels are evaluated
with :func:`.profiles.voigt_fast` (exact core, asymptotic wings).

Lines held in memory are binned and convolved segment by segment (nothing
but σ is kept); chunks streamed from a file are binned for the whole
spectrum first (float32 planes) and convolved in :meth:`FineGridAccumulator.finish`.

Normalisation: each sampled kernel is scaled so that Σ K Δν equals the area of
the truncated profile, (2/π) arctan(c/γ_L); an unresolved (narrow) profile
therefore keeps its integrated strength.
"""
from __future__ import annotations

from collections import OrderedDict

import numpy as np
import scipy.fft

from .grid import BuildGrid
from .linelist import LineList, iter_chunks
from .profiles import doppler_hwhm, truncated_fraction, voigt_fast

_KERNEL_CACHE: OrderedDict = OrderedDict()
_KERNEL_CACHE_SIZE = 400
# Planes kept between chunks (streamed sources) are float32, scaled so that line strengths
# (1e-45 ... 1e-17 cm/molecule) stay normal numbers: half the memory, 1e-7 relative rounding.
_PLANE_SCALE = 1e20


def _kernel_fft(j_d: int, j_l: int, h_d: float, h: float, d: float, n_cut: int, n_fft: int) -> np.ndarray:
    """rfft of the truncated, normalised Voigt kernel for width-grid indices (j_d, j_l)."""
    key = (j_d, j_l, h_d, h, d, n_cut, n_fft)
    hit = _KERNEL_CACHE.get(key)
    if hit is not None:
        _KERNEL_CACHE.move_to_end(key)
        return hit
    ad, gl = np.exp(j_d * h_d), np.exp(j_l * h)
    half = voigt_fast(np.arange(n_cut + 1) * d, ad, gl)   # symmetric: evaluate x >= 0 only
    kern = np.concatenate([half[:0:-1], half])
    kern *= truncated_fraction(gl, n_cut * d) / (kern.sum() * d)
    out = scipy.fft.rfft(kern, n_fft)
    _KERNEL_CACHE[key] = out
    if len(_KERNEL_CACHE) > _KERNEL_CACHE_SIZE:
        _KERNEL_CACHE.popitem(last=False)
    return out


def _split_log(width: np.ndarray, h: float) -> tuple[np.ndarray, np.ndarray]:
    """Lower log-grid index and weight of the upper neighbour for each width."""
    u = np.log(width) / h
    j = np.floor(u)
    return j.astype(np.int64), u - j


class FineGridAccumulator:
    """Accumulates line strengths into DIT planes at one (T, P); :meth:`finish` gives σ(ν).

    Parameters
    ----------
    grid : BuildGrid
    temperature_K, pressure_bar : float
    """

    def __init__(self, grid: BuildGrid, temperature_K: float, pressure_bar: float):
        self.grid, self.t, self.p = grid, float(temperature_K), float(pressure_bar)
        self.nu = grid.fine_wavenumbers()
        self.d = grid.fine_resolution
        self.h = grid.width_step
        self.h_d = grid.doppler_step
        self.i_first = int(round(self.nu[0] / self.d))
        self.n_cut = max(1, int(round(grid.wing_cutoff_cm / self.d)))
        self.seg = max(int(grid.segment_points), 4 * self.n_cut)
        self.n_seg = int(np.ceil(self.nu.size / self.seg))
        self.n_ext = self.seg + 2 * self.n_cut
        # circular convolution of length >= n_ext leaves the kept outputs [2 n_cut, 2 n_cut + seg) exact
        # (+1: one spare column per histogram row takes the weight of a line at the very end)
        self.n_fft = scipy.fft.next_fast_len(self.n_ext + 1, real=True)
        self.planes: dict[tuple[int, int, int], np.ndarray] = {}
        self.sigma = np.zeros(self.nu.size)
        # widths below these floors are unresolved spikes anyway (kept normalised)
        self.floor_d, self.floor_l = 0.05 * self.d, 0.01 * self.d

    def add(self, lines: LineList, final: bool = False) -> None:
        """Add one chunk of lines (any order).

        ``final=True`` promises that no more chunks follow: each segment is then
        convolved as soon as it is binned and nothing is stored (bounded memory).
        """
        self._bin([self._prepare(lines)], final)

    def add_all(self, chunks) -> None:
        """Add several chunks held in memory, then no more (segment-wise, bounded memory)."""
        self._bin([self._prepare(c) for c in chunks], True)

    def _prepare(self, lines: LineList):
        """Per-line grid position, strength and width-grid split, sorted by position (or None)."""
        if len(lines) == 0:
            return None
        pos = lines.line_positions(self.p)
        lo = (self.i_first - self.n_cut) * self.d
        hi = (self.i_first + self.nu.size - 1 + self.n_cut) * self.d
        keep = (pos >= lo) & (pos < hi)
        if not np.any(keep):
            return None
        if not np.all(keep):
            lines, pos = lines.select(keep), pos[keep]
        strength = lines.strength(self.t)
        ad = np.maximum(doppler_hwhm(pos, self.t, lines.mass_amu), self.floor_d)
        gl = np.maximum(lines.lorentz_hwhm(self.t, self.p, self.grid.broadeners), self.floor_l)
        u = pos / self.d - self.i_first           # fractional index on the fine grid
        jd, fd = _split_log(ad, self.h_d)
        jl, fl = _split_log(gl, self.h)
        if np.any(u[1:] < u[:-1]):  # build() pre-sorts in-memory line lists; chunks may not be
            order = np.argsort(u, kind="stable")
            u, strength, jd, fd, jl, fl = (a[order] for a in (u, strength, jd, fd, jl, fl))
        return u, strength, jd, fd, jl, fl

    def _bin(self, prepared: list, final: bool) -> None:
        self._final = final
        prepared = [p for p in prepared if p is not None]
        for s in range(self.n_seg):
            start = s * self.seg
            parts = []
            for arrays in prepared:
                a, b = np.searchsorted(arrays[0], [start - self.n_cut, start + self.seg + self.n_cut])
                if b > a:
                    parts.append([x[a:b] for x in arrays])
            if not parts:
                continue
            u, strength, jd, fd, jl, fl = (parts[0] if len(parts) == 1 else
                                           [np.concatenate(col) for col in zip(*parts)])
            self._bin_segment(s, u - (start - self.n_cut), strength, jd, fd, jl, fl)

    def _bin_segment(self, s, x, strength, jd, fd, jl, fl) -> None:
        i0 = np.floor(x).astype(np.int64)
        fx = x - i0
        jd_min, jl_min = int(jd.min()), int(jl.min())
        n_l = int(jl.max()) - jl_min + 2
        n_pairs = (int(jd.max()) - jd_min + 2) * n_l
        # rows of length n_fft (zeros past n_ext): ready for the FFT without padding copies
        stride = self.n_fft
        base = ((jd - jd_min) * n_l + (jl - jl_min)) * stride + i0
        weights, index = [], []
        for dd, wd in ((0, 1.0 - fd), (1, fd)):
            swd = strength * wd
            for dl, wl in ((0, 1.0 - fl), (1, fl)):
                swdl = swd * wl
                off = (dd * n_l + dl) * stride
                weights += [swdl * (1.0 - fx), swdl * fx]
                index += [base + off, base + off + 1]
        hist = np.bincount(np.concatenate(index), weights=np.concatenate(weights),
                           minlength=n_pairs * stride).reshape(n_pairs, stride)
        hist[:, self.n_ext:] = 0.0  # weight pushed past the padded segment (exact end point) is dropped
        used = np.flatnonzero(hist.any(axis=1))
        if getattr(self, "_final", False):  # no more chunks: convolve now, keep nothing
            widths = [(jd_min + int(p) // n_l, jl_min + int(p) % n_l) for p in used]
            self._convolve(s, widths, hist if used.size == n_pairs else hist[used])
            return
        for p in used:
            key = (s, jd_min + int(p) // n_l, jl_min + int(p) % n_l)
            plane = self.planes.get(key)
            if plane is None:
                self.planes[key] = (hist[p, :self.n_ext] * _PLANE_SCALE).astype(np.float32)
            else:
                plane += hist[p, :self.n_ext] * _PLANE_SCALE

    def _convolve_segment(self, s: int) -> None:
        """Convolve and sum the stored planes of segment ``s`` into :attr:`sigma`, then free them."""
        keys = [k for k in self.planes if k[0] == s]
        if keys:
            planes = np.stack([self.planes.pop(k) for k in keys]).astype(np.float64) / _PLANE_SCALE
            self._convolve(s, [k[1:] for k in keys], planes)

    def _convolve(self, s: int, widths: list, planes: np.ndarray) -> None:
        """Add Σ_p planes[p] ⊛ kernel(widths[p]) to segment ``s`` of :attr:`sigma` (one batched FFT)."""
        spectra = scipy.fft.rfft(planes, self.n_fft, axis=1)
        for row, (jd, jl) in zip(spectra, widths):
            row *= _kernel_fft(jd, jl, self.h_d, self.h, self.d, self.n_cut, self.n_fft)
        conv = scipy.fft.irfft(spectra.sum(axis=0), self.n_fft)
        start = s * self.seg
        n = min(self.seg, self.nu.size - start)
        # plane index m + n_cut is segment point m; the kernel centre sits at n_cut
        self.sigma[start:start + n] += conv[2 * self.n_cut:2 * self.n_cut + n]

    def finish(self) -> np.ndarray:
        """Cross sections σ on :meth:`BuildGrid.fine_wavenumbers`, cm² molecule⁻¹."""
        for s in sorted({k[0] for k in self.planes}):
            self._convolve_segment(s)
        np.maximum(self.sigma, 0.0, out=self.sigma)  # FFT round-off can leave tiny negatives far from lines
        return self.sigma


def fine_cross_sections(line_source, grid: BuildGrid, temperature_K: float, pressure_bar: float):
    """σ(ν) on the fine grid at one (T, P).

    Parameters
    ----------
    line_source : LineList, iterable of LineList, or callable returning an iterator of them

    Returns
    -------
    wavenumber_cm, sigma_cm2 : ndarray
    """
    acc = FineGridAccumulator(grid, temperature_K, pressure_bar)
    if isinstance(line_source, LineList):
        acc.add(line_source, final=True)
    elif isinstance(line_source, (list, tuple)):
        acc.add_all(line_source)
    else:
        for chunk in iter_chunks(line_source):
            acc.add(chunk)
    return acc.nu, acc.finish()
