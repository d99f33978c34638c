"""Equi-depth histogram bounds: the values at quantiles i/buckets by the inverted CDF (numpy's
`method="inverted_cdf"`), of a column's counted values or of merged parts' bounds."""

from __future__ import annotations

from typing import Any

import numpy as np


def equi_depth_positions(weights: np.ndarray, buckets: int) -> list[int]:
    """Positions of the values at quantiles i/buckets by the inverted CDF."""
    cumulative = np.cumsum(weights)
    total = cumulative[-1]
    ranks = np.maximum(np.ceil(np.linspace(0.0, 1.0, buckets + 1) * total - 1e-9), 1.0)
    return np.minimum(np.searchsorted(cumulative, ranks - 1e-9, side="left"), len(weights) - 1).tolist()


def equi_depth(values: np.ndarray, weights: np.ndarray, buckets: int) -> list[Any]:
    """Bounds of sorted `values`, each standing for `weights` rows, at quantiles i/buckets."""
    return [values[p] for p in equi_depth_positions(weights, buckets)]
