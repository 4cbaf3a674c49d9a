"""Closed-form approximations of a derived law that a user can paste into other code."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._validate import choice
from ._law import SwitchingLaw

FORMULAS = ("logistic", "hill")


def _logistic(v, a, b):
    return 1.0 / (1.0 + np.exp(-(a + b * v)))


def _probability(kind: str, values):
    """A fitted Hill curve can leave [0, 1] (low < 0 or high > 1): evaluated and exported
    clipped to [0, 1]; the logistic form cannot leave it."""
    return np.clip(values, 0.0, 1.0) if kind == "hill" else values


def _hill(v, low, high, half, n):
    v = np.clip(v, 0.0, None)
    ratio = np.where(v > 0, (v / half) ** n, 0.0)
    return low + (high - low) * ratio / (1.0 + ratio)


_SHAPES = {
    "logistic": (_logistic, ("a", "b"), "1 / (1 + exp(-(a + b * v)))"),
    "hill": (_hill, ("low", "high", "half", "n"), "low + (high - low) * v**n / (half**n + v**n)"),
}


@dataclass(frozen=True, repr=False)
class FormulaFit:
    """A closed form for ``q(phenotype | v)`` fitted to a derived law.

    Attributes
    ----------
    kind : str
        ``"logistic"`` or ``"hill"``.
    phenotype : str
    formula : str
        The expression in the signal value ``v`` with parameter names.
    parameters : dict of str -> ndarray
        Fitted values: shape (k,) per density when ``per_density`` else shape ().
    densities : ndarray
    max_abs_error : float
        Largest ``|formula - law|`` over every state and density of the law's grid.
    per_density : bool
    """

    kind: str
    phenotype: str
    formula: str
    parameters: dict
    densities: np.ndarray
    max_abs_error: float
    per_density: bool

    def evaluate(self, v, density_index: int | None = None) -> np.ndarray:
        """The formula at signal values ``v`` (at one grid density when fitted per density)."""
        shape, names, _ = _SHAPES[self.kind]
        params = [
            self.parameters[name] if not self.per_density else self.parameters[name][density_index]
            for name in names
        ]
        return _probability(self.kind, shape(np.asarray(v, dtype=float), *params))

    def expression(self, density_index: int | None = None) -> str:
        """The formula with numbers substituted (plain Python syntax, ``exp`` from math)."""
        text = self.formula
        shape, names, _ = _SHAPES[self.kind]
        for name in sorted(names, key=len, reverse=True):
            value = self.parameters[name]
            number = float(value if not self.per_density else value[density_index])
            text = text.replace(name, repr(number))
        return text

    def __repr__(self) -> str:
        where = "per density" if self.per_density else "one formula for all densities"
        return (
            f"FormulaFit({self.kind} for q({self.phenotype} | v), {where}, "
            f"max abs error {self.max_abs_error:.3g})"
        )


def fit_formula(law: SwitchingLaw, phenotype, *, kind: str = "logistic", per_density: bool = False) -> FormulaFit:
    """Fit a closed form in the signal value to the probability of one phenotype.

    Parameters
    ----------
    law : SwitchingLaw
    phenotype : str or int
        Name (or index) of the phenotype whose probability is fitted.
    kind : {"logistic", "hill"}
        ``1 / (1 + exp(-(a + b v)))``, or ``low + (high - low) v^n / (half^n + v^n)``.
    per_density : bool
        One parameter set per grid density (exact dependence on density through the marginal),
        or a single formula for all densities.

    Returns
    -------
    FormulaFit
        With ``max_abs_error`` against the exact law, so a user knows whether the formula is
        good enough. Least squares (``scipy.optimize.least_squares``) on the probabilities.
    """
    from scipy.optimize import least_squares

    choice(kind, "kind", FORMULAS)
    if isinstance(phenotype, (int, np.integer)) and not isinstance(phenotype, bool):
        index = int(phenotype)
        if not 0 <= index < len(law.phenotypes):
            raise InputError(f"`phenotype` index must be in [0, {len(law.phenotypes) - 1}] (got {index})")
    elif phenotype in law.phenotypes:
        index = law.phenotypes.index(phenotype)
    else:
        raise InputError(f"`phenotype` must be one of {list(law.phenotypes)} (got {phenotype!r})")
    if law.state_values.ndim != 1:
        raise InputError("`law` must be over a one-dimensional signal to fit a formula in it")
    v = law.state_values.astype(float)
    target = law.table[:, :, index]  # [density, state]
    shape, names, formula = _SHAPES[kind]

    def start(q):
        if kind == "logistic":
            clipped = np.clip(q, 1e-6, 1 - 1e-6)
            slope, intercept = np.polyfit(v, np.log(clipped / (1 - clipped)), 1)
            return np.array([intercept, slope]), None
        rising = q[-1] >= q[0]
        low, high = (q.min(), q.max()) if rising else (q.max(), q.min())
        half = max(float(np.median(v[v > 0])) if (v > 0).any() else 1.0, 1e-6)
        return np.array([low, high, half, 2.0]), ([-0.5, -0.5, 1e-9, 0.05], [1.5, 1.5, np.inf, 100.0])

    def fit(q_rows):
        x0, bounds = start(q_rows.mean(axis=0))
        result = least_squares(
            lambda theta: (shape(v[None, :], *theta) - q_rows).ravel(), x0,
            bounds=bounds if bounds is not None else (-np.inf, np.inf),
            xtol=1e-15, ftol=1e-15, gtol=1e-15,
        )
        return result.x

    if per_density:
        thetas = np.stack([fit(target[i : i + 1]) for i in range(target.shape[0])])
        parameters = {name: thetas[:, j] for j, name in enumerate(names)}
        fitted = np.stack([shape(v, *thetas[i]) for i in range(target.shape[0])])
    else:
        theta = fit(target)
        parameters = {name: np.asarray(theta[j]) for j, name in enumerate(names)}
        fitted = np.broadcast_to(shape(v, *theta), target.shape)
    return FormulaFit(
        kind=kind, phenotype=law.phenotypes[index], formula=formula, parameters=parameters,
        densities=law.densities, max_abs_error=float(np.abs(_probability(kind, fitted) - target).max()),
        per_density=per_density,
    )
