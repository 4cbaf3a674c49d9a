"""What a front run measures: positions, speeds, widths and compositions (pure functions)."""

from __future__ import annotations

import numpy as np


def crossing(x: np.ndarray, total: np.ndarray, level: float) -> float:
    """Outermost point where ``total`` falls through ``level`` (linear interpolation).

    ``nan`` when ``total`` is below ``level`` everywhere; ``x[-1]`` when it is above everywhere.
    """
    above = np.flatnonzero(total >= level)
    if above.size == 0:
        return float("nan")
    i = int(above[-1])
    if i == x.size - 1:
        return float(x[-1])
    w = (total[i] - level) / (total[i] - total[i + 1])
    return float(x[i] + w * (x[i + 1] - x[i]))


def composition(x: np.ndarray, profile: np.ndarray, at: float) -> np.ndarray:
    """Phenotype fractions of ``profile`` (cells, phenotypes) at position ``at`` (interpolated)."""
    values = np.array([np.interp(at, x, profile[:, k]) for k in range(profile.shape[1])])
    values = np.clip(values, 0.0, None)
    total = values.sum()
    return values / total if total > 0 else np.full(values.size, np.nan)


def log_correction(decay_rate: float, dimension: int = 1) -> float:
    """Coefficient ``k`` of ``X(t) = c* t - k log t`` for a pulled front.

    ``k = 3 / (2 lambda*)`` on a line (Ebert & van Saarloos 2000); radially symmetric fronts
    in ``d`` dimensions carry ``(d + 2) / (2 lambda*)`` (Gärtner 1982 for the Fisher–KPP
    equation; from memory).
    """
    if not np.isfinite(decay_rate) or decay_rate <= 0:
        return 0.0
    return (dimension + 2) / (2.0 * decay_rate)


def fit_speed(times: np.ndarray, positions: np.ndarray, k: float) -> tuple[float, float]:
    """``(c, plain)``: least-squares speed with ``X = c t - k log t + a``, and a straight line's slope."""
    plain = float(np.polyfit(times, positions, 1)[0])
    if k == 0.0:
        return plain, plain
    corrected = float(np.polyfit(times, positions + k * np.log(times), 1)[0])
    return corrected, plain


def expected_plain_slope(times: np.ndarray, speed: float, k: float) -> float:
    """Slope of a straight-line fit to ``c t - k log t`` over ``times``: what a pulled front's
    uncorrected late-window fit should return."""
    return float(np.polyfit(times, speed * times - k * np.log(times), 1)[0])
