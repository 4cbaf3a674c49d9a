"""Standard errors of long-run averages from batch means."""

from __future__ import annotations

import numpy as np


def batch_means(increments: np.ndarray, durations: np.ndarray, batches: int) -> tuple[float, float]:
    """Long-run rate ``sum(increments) / sum(durations)`` and its standard error.

    The history is cut into ``batches`` contiguous batches of (nearly) equal numbers of
    steps. The rate is a ratio estimator; its standard error is
    ``sqrt(sum_b (L_b - rate T_b)^2 / (B (B - 1))) / mean_b T_b`` with ``L_b`` and ``T_b`` the
    batch totals (the delta method; with unit durations this is the plain standard error of
    the batch means). Valid when a batch is much longer than the correlation time of the
    increments.

    References
    ----------
    Asmussen, S. & Glynn, P. W. (2007). *Stochastic Simulation: Algorithms and Analysis*,
    Springer (batch means and ratio estimators; cited from memory).
    """
    edges = np.linspace(0, increments.size, batches + 1).round().astype(int)
    gains = np.add.reduceat(increments, edges[:-1])
    times = np.add.reduceat(durations, edges[:-1])
    rate = float(gains.sum() / times.sum())
    residuals = gains - rate * times
    error = float(np.sqrt(residuals @ residuals / (batches * (batches - 1))) / times.mean())
    return rate, error
