"""Binomial confidence intervals and where a curve crosses one half."""

from __future__ import annotations

import numpy as np

#: Two-sided 95 % standard-normal quantile, ``Phi^{-1}(0.975)``.
Z95 = 1.959963984540054


def wilson_interval(hits, trials, z: float = Z95) -> np.ndarray:
    """Wilson score interval for a binomial proportion, shape ``(..., 2)``.

    ``(h + z^2/2) / (n + z^2) +- z sqrt(h (n - h) / n + z^2 / 4) / (n + z^2)``. It keeps its
    coverage near 0 and 1, where the normal (Wald) interval collapses.

    References
    ----------
    Wilson, E. B. (1927). Probable inference, the law of succession, and statistical
    inference. *J. Am. Stat. Assoc.* 22:209–212. Newcombe, R. G. (1998). Two-sided confidence
    intervals for the single proportion. *Stat. Med.* 17:857–872.

    Examples
    --------
    >>> wilson_interval(81, 263).round(4).tolist()
    [0.2553, 0.3662]
    """
    h = np.asarray(hits, dtype=np.float64)
    n = np.asarray(trials, dtype=np.float64)
    z2 = z * z
    centre = (h + z2 / 2.0) / (n + z2)
    half = z * np.sqrt(h * (n - h) / n + z2 / 4.0) / (n + z2)
    return np.stack([np.clip(centre - half, 0.0, 1.0), np.clip(centre + half, 0.0, 1.0)], axis=-1)


def crossing(sizes: np.ndarray, values: np.ndarray, level: float = 0.5) -> float | None:
    """First size where ``values`` falls from ``>= level`` to ``< level`` (linear interpolation).

    ``None`` when the curve never falls through ``level`` over the sizes given.
    """
    for i in range(values.size - 1):
        a, b = values[i], values[i + 1]
        if a >= level > b:
            return float(sizes[i] + (a - level) / (a - b) * (sizes[i + 1] - sizes[i]))
    return None
