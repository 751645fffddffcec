"""Opacity *use* (the hot path): tables, continua, clouds, k-mixing.

Opacity *building* (line lists -> tables) lives in :mod:`retrieve.opacity_build`.
"""
