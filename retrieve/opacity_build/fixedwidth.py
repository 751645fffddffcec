"""Vectorised parsing of fixed-width numeric fields from a block of text records.

Records are an ``(n, width)`` uint8 array (one row per record).  A field with a
known decimal-point column is parsed as Σ digit × 10^k with a single matrix
product; rows whose point is not where expected fall back to numpy's string
conversion, so unusual but valid numbers are still read correctly.
"""
from __future__ import annotations

import numpy as np

_DOT, _MINUS, _ZERO = ord("."), ord("-"), ord("0")


_DIGIT_LUT = np.zeros(256)
_DIGIT_LUT[_ZERO:_ZERO + 10] = np.arange(10.0)


def _weighted_digits(block: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Σ_j digit(block[:, j]) × weights[j], column by column (non-digits count 0).

    Column-wise table look-ups avoid (n, width) float temporaries.
    """
    out = np.zeros(block.shape[0])
    for j, w in enumerate(weights):
        if w != 0.0:
            out += _DIGIT_LUT[block[:, j]] * w
    return out


def _has_minus(block: np.ndarray) -> np.ndarray:
    neg = block[:, 0] == _MINUS
    for j in range(1, block.shape[1]):
        neg |= block[:, j] == _MINUS
    return neg


def _fallback(block: np.ndarray) -> np.ndarray:
    """Slow, general conversion of rows of characters to float (blank -> NaN)."""
    width = block.shape[1]
    text = np.ascontiguousarray(block).view(f"S{width}").ravel()
    out = np.full(text.size, np.nan)
    for i, item in enumerate(text):
        s = item.strip()
        if s:
            try:
                out[i] = float(s.replace(b"D", b"E"))
            except ValueError:
                pass
    return out


def parse_fixed(records: np.ndarray, start: int, width: int, decimals: int) -> np.ndarray:
    """Parse an Fw.d field at columns [start, start+width) (point at width-decimals-1)."""
    block = records[:, start:start + width]
    dot_col = width - decimals - 1
    weights = 10.0 ** (dot_col - 1 - np.arange(width))
    weights[dot_col] = 0.0
    weights[dot_col + 1:] = 10.0 ** -(np.arange(decimals) + 1.0)
    value = _weighted_digits(block, weights)
    neg = _has_minus(block)
    value[neg] = -value[neg]
    bad = block[:, dot_col] != _DOT
    if np.any(bad):
        value[bad] = _fallback(block[bad])
    return value


def parse_exponent(records: np.ndarray, start: int, width: int, decimals: int) -> np.ndarray:
    """Parse an Ew.d field ``±d.dddE±dd`` at columns [start, start+width)."""
    block = records[:, start:start + width]
    e_col = width - 4
    dot_col = e_col - decimals - 1
    mant = block[:, :e_col]
    weights = np.zeros(e_col)
    weights[dot_col - 1] = 1.0
    weights[dot_col + 1:] = 10.0 ** -(np.arange(decimals) + 1.0)
    m = _weighted_digits(mant, weights)
    exp = _weighted_digits(block[:, e_col + 2:], np.array([10.0, 1.0]))
    exp_neg = block[:, e_col + 1] == _MINUS
    exp[exp_neg] = -exp[exp_neg]
    neg = _has_minus(mant)
    value = np.where(neg, -m, m) * 10.0 ** exp
    letter = block[:, e_col]
    bad = (block[:, dot_col] != _DOT) | ((letter != ord("E")) & (letter != ord("e")))
    if np.any(bad):
        value[bad] = _fallback(block[bad])
    return value


def parse_int(records: np.ndarray, start: int, width: int) -> np.ndarray:
    """Parse an Iw field (blank -> 0)."""
    block = records[:, start:start + width]
    value = _weighted_digits(block, 10.0 ** (width - 1 - np.arange(width))).astype(np.int64)
    neg = _has_minus(block)
    value[neg] = -value[neg]
    return value
