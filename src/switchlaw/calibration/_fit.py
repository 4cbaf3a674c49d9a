"""``calibrate``: maximum-likelihood fit of beta and payoff parameters, with profile intervals."""

from __future__ import annotations

import inspect
import math
import warnings
from typing import Mapping

import numpy as np

from .._errors import InputError
from .._validate import choice
from ..decision._costs import beta_from_cost
from ..decision._solve import OBJECTIVES
from ..laws._environments import Environment, as_environment
from ..laws._law import derive_law
from ..laws._payoffs import payoff_table
from ._data import Data, Snapshot, from_arrays, from_snapshots, from_table, is_table
from ._model import Conditions, law_probs, log_likelihood
from ._results import Calibration, Profile

#: Chi-square(1) 0.95 quantile (Wilks 1938): the 95% profile set is ``2 (l_max - l) <= 3.841459``.
CHI2_1_95 = 3.8414588206941236
#: The cut-off on the log-likelihood drop, ``CHI2_1_95 / 2``.
CUTOFF = CHI2_1_95 / 2.0
#: Parameters that set beta itself.
BETA_NAMES = ("beta", "cost_per_bit")
#: Certificate: projected gradient of the mean log-likelihood per cell, times max(1, |theta|).
TOLERANCE = 1e-6
#: Objective value for parameters under which an observed phenotype has probability zero.
_IMPOSSIBLE = 1e10


# ----------------------------------------------------------------------------- the problem
class _Problem:
    """Data, environments and payoff for one fit; evaluates the likelihood of a parameter vector."""

    def __init__(self, payoff, environment, data: Data, names, fixed, objective, phenotypes, *, has_params):
        self.payoff = payoff
        self.has_params = has_params
        self.environment = environment
        self.data = data
        self.names = tuple(names)
        self.fixed = dict(fixed)
        self.objective = objective
        self.phenotypes = phenotypes
        grid = data.densities
        self.envs = [_environment_at(environment, None if grid is None else float(rho)) for rho in
                     (grid if grid is not None else [None])]
        probs = np.stack([env.probs for env in self.envs])
        if self.envs[0].channel is not None:
            with np.errstate(divide="ignore"):
                log_channel = np.stack([np.log(env.channel) for env in self.envs])
        else:
            log_channel = None
        self.conditions = Conditions(probs, log_channel)
        self.cells = float(data.counts.sum())
        self._starts = None
        self._payoffs = {}
        first = self.envs[0]
        self._shared = all(
            env.channel is None and env.values.shape == first.values.shape
            and np.array_equal(env.values, first.values) for env in self.envs
        )

    # -- parameters
    def split(self, theta) -> tuple[float, dict]:
        values = dict(self.fixed)
        values.update(zip(self.names, (float(t) for t in theta)))
        if "cost_per_bit" in values:
            beta = beta_from_cost(values.pop("cost_per_bit"))
        else:
            beta = float(values.pop("beta"))
        return beta, values

    def payoff_at(self, params: dict):
        """The payoff (table or mapping) at payoff parameters ``params``."""
        if self.has_params:
            return self.payoff(**params)
        return self.payoff

    def U(self, params: dict) -> np.ndarray:
        """Payoff over decided-on states at every condition, shape ``(k, m, n)``."""
        key = tuple(sorted(params.items()))
        if key in self._payoffs:
            return self._payoffs[key]
        given = self.payoff_at(params)
        if self._shared and (isinstance(given, Mapping) or not callable(given)):
            # Same signal values and no receptor at every condition: one table serves all.
            table, _ = payoff_table(given, self.envs[0], self.phenotypes, where=" (payoff at the fitted parameters)")
            U = np.broadcast_to(table, (len(self.envs),) + table.shape)
        else:
            tables = []
            for env in self.envs:
                table, _ = payoff_table(given, env, self.phenotypes, where=" (payoff at the fitted parameters)")
                tables.append(env.sensed_payoff(table))
            U = np.stack(tables)
        if len(self._payoffs) > 64:
            self._payoffs.clear()
        self._payoffs[key] = U
        return U

    # -- likelihood
    def log_likelihood(self, theta, *, with_gradient: bool):
        beta, params = self.split(theta)
        U = self.U(params)
        value, d_beta, d_U, r = log_likelihood(
            self.data.kind, self.data.counts, self.conditions, U, beta, self.objective,
            with_gradient=with_gradient, starts=self._starts,
        )
        if self.objective == "min-information":
            self._starts = r
        if not with_gradient:
            return value, None
        if not np.isfinite(value):
            return value, np.zeros(len(self.names))
        grad = np.empty(len(self.names))
        for j, name in enumerate(self.names):
            if name == "beta":
                grad[j] = d_beta
            elif name == "cost_per_bit":
                c = float(theta[j])
                grad[j] = d_beta * (-math.log(2.0) / c**2)
            else:
                # The user's payoff: central differences in its own parameter.
                h = 1e-6 * max(1.0, abs(params[name]))
                up = self.U({**params, name: params[name] + h})
                down = self.U({**params, name: params[name] - h})
                grad[j] = float(np.sum(d_U * (up - down)) / (2.0 * h))
        return value, grad

    def probabilities(self, theta) -> tuple[np.ndarray, np.ndarray]:
        """``(q_obs, fractions)``: predicted probabilities shaped like the counts, and ``f[k, x]``."""
        from ._model import marginals

        beta, params = self.split(theta)
        U = self.U(params)
        r = marginals(U, self.conditions.probs, beta, self.objective)
        q = law_probs(U, r, beta)
        fractions = np.einsum("ks,ksx->kx", self.conditions.probs, q)
        if self.data.kind == "fractions":
            return fractions, fractions
        if self.conditions.log_channel is not None:
            q = np.einsum("kys,ksx->kyx", np.exp(self.conditions.log_channel), q)
        return q, fractions


def _environment_at(environment, rho):
    if callable(environment) and not isinstance(environment, Environment):
        if rho is None:
            raise InputError("`densities` must be given when `environment` is a callable density -> Environment")
        return as_environment(environment(rho), "environment")
    return as_environment(environment, "environment")


# ----------------------------------------------------------------------------- input checks
def _payoff_parameters(payoff) -> tuple[set | None, bool]:
    """The keyword names a callable payoff takes (``None``: any) and whether it is callable."""
    if isinstance(payoff, Mapping) or not callable(payoff):
        return set(), False
    try:
        signature = inspect.signature(payoff)
    except (TypeError, ValueError):
        return None, True
    if any(p.kind is p.VAR_KEYWORD for p in signature.parameters.values()):
        return None, True
    return {p.name for p in signature.parameters.values()
            if p.kind in (p.POSITIONAL_OR_KEYWORD, p.KEYWORD_ONLY)}, True


def _check_parameters(payoff, free, fixed, start):
    if not isinstance(free, Mapping) or not free:
        raise InputError(f"`free` must map parameter names to (low, high) bounds (got {free!r})")
    fixed = {} if fixed is None else fixed
    if not isinstance(fixed, Mapping):
        raise InputError(f"`fixed` must map parameter names to values (got {fixed!r})")
    both = [name for name in free if name in fixed]
    if both:
        raise InputError(f"`fixed` and `free` both name {both[0]!r}")
    routes = [name for name in list(free) + list(fixed) if name in BETA_NAMES + ("bits",)]
    if "bits" in routes:
        raise InputError("`free` may name 'beta' or 'cost_per_bit'; fitting an information budget ('bits') is not supported")
    if len(routes) != 1:
        raise InputError(
            "exactly one of 'beta' or 'cost_per_bit' must be in `free` or `fixed` "
            f"(got {routes or 'none'})"
        )
    accepted, is_callable = _payoff_parameters(payoff)
    payoff_names = [name for name in list(free) + list(fixed) if name not in BETA_NAMES]
    for name in payoff_names:
        if not is_callable:
            raise InputError(
                f"`free` names {name!r}, but the payoff is a table or mapping and takes no parameters"
            )
        if accepted is not None and name not in accepted:
            raise InputError(
                f"`free` names {name!r}, a parameter the payoff does not take (it takes {sorted(accepted)})"
            )
    bounds = {}
    for name, pair in free.items():
        try:
            low, high = (float(v) for v in pair)
        except (TypeError, ValueError):
            raise InputError(f"`free[{name!r}]` must be (low, high) bounds (got {pair!r})") from None
        if not (np.isfinite(low) and np.isfinite(high)) or not low < high:
            raise InputError(f"`free[{name!r}]` must be finite bounds with low < high (got {pair!r})")
        if name in BETA_NAMES and low < 0:
            raise InputError(f"`free[{name!r}]` must have low >= 0 (got {low!r})")
        if name == "cost_per_bit" and low <= 0:
            raise InputError(f"`free['cost_per_bit']` must have low > 0 (got {low!r})")
        bounds[name] = (low, high)
    values = {}
    for name, value in fixed.items():
        try:
            values[name] = float(value)
        except (TypeError, ValueError):
            raise InputError(f"`fixed[{name!r}]` must be a number (got {value!r})") from None
        if not np.isfinite(values[name]):
            raise InputError(f"`fixed[{name!r}]` must be finite (got {value!r})")
    starts = {}
    if start is not None:
        if not isinstance(start, Mapping):
            raise InputError(f"`start` must map free parameter names to values (got {start!r})")
        for name, value in start.items():
            if name not in bounds:
                raise InputError(f"`start` names {name!r}, which is not in `free`")
            low, high = bounds[name]
            if not low <= float(value) <= high:
                raise InputError(
                    f"`start[{name!r}]` = {value!r} lies outside its bounds [{low:g}, {high:g}] in `free`"
                )
            starts[name] = float(value)
    return bounds, values, starts


def _snapshots(observations) -> list | None:
    """The snapshots in ``observations`` (one or a sequence), or ``None`` for other forms."""
    if isinstance(observations, Snapshot):
        return [observations]
    if isinstance(observations, (list, tuple)) and observations and all(isinstance(o, Snapshot) for o in observations):
        return list(observations)
    return None


def _observations(observations, payoff_start, environment, densities, phenotypes):
    """Phenotype names and the observed counts, checked against the environment and payoff."""
    snapshots = _snapshots(observations)
    # A density at which to ask the environment for its states and the payoff for its columns.
    rho0 = None
    if densities is not None:
        try:
            rho0 = float(np.ravel(np.asarray(densities, dtype=float))[0])
        except (TypeError, ValueError, IndexError):
            rho0 = None  # from_arrays / from_snapshots name the problem
        if rho0 is not None and not 0.0 <= rho0 <= 1.0:
            rho0 = None
    if rho0 is None and snapshots is not None:
        rho0 = float((np.asarray(snapshots[0].labels) != 0).mean())
    if rho0 is None and not isinstance(environment, Environment):
        rho0 = 0.5  # only the state labels and payoff columns are read from it
    env0 = _environment_at(environment, rho0)
    table, names = payoff_table(payoff_start, env0, phenotypes)
    m, n = env0.hidden_probs.size, table.shape[1]
    if snapshots is not None:
        return names, from_snapshots(snapshots, densities, states=m, phenotypes=n)
    if is_table(observations):
        return names, from_table(
            observations, environment_at=lambda rho: _environment_at(environment, rho),
            phenotype_names=names, densities=densities,
        )
    return names, from_arrays(observations, densities, states=m, phenotypes=n)


# ----------------------------------------------------------------------------- optimisation
def _maximise(problem: _Problem, start, bounds, *, free_mask=None):
    """L-BFGS-B on the mean negative log-likelihood per cell; returns ``(theta, l)``."""
    from scipy.optimize import minimize

    start = np.asarray(start, dtype=float)
    mask = np.ones(start.size, dtype=bool) if free_mask is None else free_mask
    if not mask.any():
        return start, problem.log_likelihood(start, with_gradient=False)[0]

    def fun(x):
        theta = start.copy()
        theta[mask] = x
        value, grad = problem.log_likelihood(theta, with_gradient=True)
        if not np.isfinite(value):
            return _IMPOSSIBLE, np.zeros(x.size)
        return -value / problem.cells, -grad[mask] / problem.cells

    result = minimize(fun, start[mask], jac=True, method="L-BFGS-B",
                      bounds=[b for b, keep in zip(bounds, mask) if keep],
                      options={"ftol": 1e-15, "gtol": 1e-11, "maxiter": 1000})
    theta = start.copy()
    theta[mask] = result.x
    return theta, problem.log_likelihood(theta, with_gradient=False)[0]


def _hessian(problem: _Problem, theta, bounds) -> np.ndarray:
    """Hessian of the log-likelihood by central differences of its exact gradient."""
    k = theta.size
    H = np.empty((k, k))
    for j in range(k):
        h = 1e-5 * max(1.0, abs(theta[j]))
        up, down = theta.copy(), theta.copy()
        up[j] = min(theta[j] + h, bounds[j][1])
        down[j] = max(theta[j] - h, bounds[j][0])
        g_up = problem.log_likelihood(up, with_gradient=True)[1]
        g_down = problem.log_likelihood(down, with_gradient=True)[1]
        H[:, j] = (g_up - g_down) / (up[j] - down[j])
    return 0.5 * (H + H.T)


def _polish(problem: _Problem, theta, value, bounds):
    """Newton steps on the interior parameters (the quasi-Newton fit stops a little short)."""
    for _ in range(5):
        _, grad = problem.log_likelihood(theta, with_gradient=True)
        interior = np.array([lo < t < hi for t, (lo, hi) in zip(theta, bounds)])
        if not interior.any():
            break
        H = _hessian(problem, theta, bounds)[np.ix_(interior, interior)]
        try:
            if np.linalg.eigvalsh(-H).min() <= 0:
                break
            step = np.linalg.solve(-H, grad[interior])
        except np.linalg.LinAlgError:
            break
        trial = theta.copy()
        trial[interior] = np.clip(theta[interior] + step, [b[0] for b, i in zip(bounds, interior) if i],
                                  [b[1] for b, i in zip(bounds, interior) if i])
        new = problem.log_likelihood(trial, with_gradient=False)[0]
        if not new >= value:
            break
        theta, value = trial, new
    return theta, value


def _projected_gradient(problem, theta, bounds) -> float:
    _, grad = problem.log_likelihood(theta, with_gradient=True)
    g = grad.copy()
    for j, (lo, hi) in enumerate(bounds):
        if theta[j] <= lo and g[j] < 0 or theta[j] >= hi and g[j] > 0:
            g[j] = 0.0
    return float(np.max(np.abs(g) * np.maximum(1.0, np.abs(theta))) / problem.cells)


def _starts(bounds, given: dict, names, count: int, seed) -> list[np.ndarray]:
    """The user's start (or the middle of the bounds), then Latin-hypercube points."""
    from scipy.stats import qmc

    lows = np.array([b[0] for b in bounds])
    highs = np.array([b[1] for b in bounds])
    first = np.array([given.get(name, 0.5 * (lo + hi)) for name, lo, hi in zip(names, lows, highs)])
    points = [first]
    if count > 1:
        sample = qmc.LatinHypercube(d=len(names), seed=np.random.default_rng(seed)).random(count - 1)
        points.extend(lows + sample * (highs - lows))
    return points


# ----------------------------------------------------------------------------- profiles
def _profile(problem, j, theta, value, bounds, se):
    """Profile of parameter ``j``: walk out on each side until the drop passes the cut-off."""
    from scipy.optimize import brentq

    mask = np.ones(theta.size, dtype=bool)
    mask[j] = False
    lo_bound, hi_bound = bounds[j]
    width = hi_bound - lo_bound
    step = se if np.isfinite(se) and 0 < se < width else width / 20.0
    points = {float(theta[j]): (0.0, theta.copy())}
    ends = []
    for side in (-1.0, 1.0):
        bound = lo_bound if side < 0 else hi_bound
        current = theta.copy()
        inside, outside = float(theta[j]), None
        for factor in (1.0, 1.6, 2.2, 3.0, 4.5, 7.0, 11.0, 18.0, 30.0, 50.0, 100.0, 300.0, 1000.0, math.inf):
            target = theta[j] + side * factor * step
            target = max(target, lo_bound) if side < 0 else min(target, hi_bound)
            current[j] = target
            current, l_p = _maximise(problem, current, bounds, free_mask=mask)
            points[float(target)] = (value - l_p, current.copy())
            if value - l_p > CUTOFF:
                outside = float(target)
                break
            inside = float(target)
            if target == bound:
                break
        if outside is None:
            ends.append(-math.inf if side < 0 else math.inf)
            continue
        warm = {"theta": points[inside][1].copy()}

        def excess(v):
            trial = warm["theta"].copy()
            trial[j] = v
            trial, l_p = _maximise(problem, trial, bounds, free_mask=mask)
            points[float(v)] = (value - l_p, trial.copy())
            return value - l_p - CUTOFF

        root = brentq(excess, inside, outside, xtol=1e-9 * max(1.0, abs(theta[j])), rtol=1e-12)
        ends.append(float(root))
    values = np.array(sorted(points))
    drops = np.array([points[v][0] for v in values])
    others = np.stack([points[v][1] for v in values])
    return (ends[0], ends[1]), Profile(problem.names[j], values, drops, others, CUTOFF)


# ----------------------------------------------------------------------------- goodness of fit
def _saturated(data: Data) -> tuple[float, int]:
    """Log-likelihood of a free distribution per observed row, and the number of such rows."""
    from scipy.special import xlogy

    counts = data.counts.reshape(-1, data.counts.shape[-1])
    totals = counts.sum(axis=1)
    rows = totals > 0
    value = float(np.sum(xlogy(counts[rows], counts[rows] / totals[rows, None])))
    return value, int(rows.sum())


def _logit_alternative(problem: _Problem) -> dict:
    """A free multinomial logit in the signal, ``logit_x(s) = a_x + b_x . v(s)``, by ML."""
    from scipy.optimize import minimize

    from ._model import log_likelihood as model_log_likelihood

    values = [np.asarray(env.decision_values, dtype=float) for env in problem.envs]
    V = np.stack([v.reshape(v.shape[0], -1) for v in values])  # [k, s, c]
    scale = np.maximum(np.abs(V).max(axis=(0, 1)), 1e-300)
    V = V / scale
    n = problem.data.counts.shape[-1]
    c = V.shape[2]
    size = (n - 1) * (1 + c)

    def table(w):
        a = w[: n - 1]
        b = w[n - 1:].reshape(c, n - 1)
        logits = a[None, None, :] + np.einsum("ksc,cx->ksx", V, b)
        return np.concatenate([np.zeros(logits.shape[:2] + (1,)), logits], axis=2)

    def fun(w):
        value, _, d_U, _ = model_log_likelihood(
            problem.data.kind, problem.data.counts, problem.conditions, table(w), 1.0, "max-entropy",
            with_gradient=True,
        )
        d = d_U[:, :, 1:]
        grad = np.concatenate([d.sum(axis=(0, 1)), np.einsum("ksx,ksc->cx", d, V).ravel()])
        return -value / problem.cells, -grad / problem.cells

    best = None
    # Per-cell data: the multinomial logit likelihood is concave, one start suffices.
    starts = (np.zeros(size),) if problem.data.kind == "states" else (np.zeros(size), np.full(size, 0.5))
    for start in starts:
        result = minimize(fun, start, jac=True, method="BFGS", options={"gtol": 1e-10, "maxiter": 2000})
        if best is None or result.fun < best.fun:
            best = result
    l_alt = -best.fun * problem.cells
    return {
        "name": "multinomial logit in the signal" if n > 2 else "logistic in the signal",
        "log_likelihood": float(l_alt),
        "parameters": int(size),
        "aic": float(2 * size - 2 * l_alt),
        "bic": float(size * math.log(problem.cells) - 2 * l_alt),
    }


def _verdict(objective, k, l_fit, alternative, cells) -> str:
    aic = 2 * k - 2 * l_fit
    bic = k * math.log(cells) - 2 * l_fit
    d_aic = alternative["aic"] - aic
    d_bic = alternative["bic"] - bic
    law = f"the {objective} law ({k} parameters)"
    free = f"a free {alternative['name']} ({alternative['parameters']} parameters)"
    if abs(d_aic) < 2.0:
        return f"Neither {law} nor {free} is clearly better: |ΔAIC| = {abs(d_aic):.2f} < 2 (ΔBIC = {d_bic:+.2f} in the law's favour)."
    better, worse = (law, free) if d_aic > 0 else (free, law)
    return (
        f"{better[0].upper()}{better[1:]} explains the data better than {worse}: "
        f"ΔAIC = {abs(d_aic):.2f}, ΔBIC = {d_bic:+.2f} in the law's favour."
    )


# ----------------------------------------------------------------------------- public
def calibrate(
    observations,
    payoff,
    environment,
    *,
    free,
    densities=None,
    fixed=None,
    objective: str = "max-entropy",
    phenotypes=None,
    start=None,
    starts: int = 4,
    seed=0,
    bootstrap: int = 0,
    posterior: int = 0,
) -> Calibration:
    """Fit ``beta`` and payoff parameters to observed phenotypes by maximum likelihood.

    Parameters
    ----------
    observations : array_like, Snapshot, sequence of Snapshot, DataFrame or path
        Per-cell counts ``[state, phenotype]`` (one condition) or ``[density, state,
        phenotype]`` (with ``densities``); counts of phenotypes only, ``[density, phenotype]``
        (with ``densities``; the likelihood uses ``f(x | rho) = sum_y p(y | rho) q(x | y, rho)``);
        labelled lattice snapshots (:class:`switchlaw.Snapshot`); or a tidy table (a pandas
        DataFrame or a CSV path) with columns ``phenotype``, optional ``count``, ``state`` or
        ``signal``, and/or ``density``. States are those of the environment (a true state
        when the environment has a receptor).
    payoff : array_like, mapping or callable
        A ``[state, phenotype]`` table or a mapping ``phenotype -> f(signal)`` (no payoff
        parameters); or a callable ``payoff(**params)`` returning either, whose keyword
        parameters may be named in ``free`` and ``fixed``. A callable with no parameter named
        there follows :func:`switchlaw.derive_law`'s convention (``environment -> table``).
    environment : Environment or callable
        One environment, or ``density -> Environment``.
    free : mapping str -> (low, high)
        Free parameters and their bounds: ``"beta"`` (nats per payoff unit) or
        ``"cost_per_bit"`` (payoff units per bit, ``beta = ln 2 / cost``), and payoff keywords.
    densities : array_like, optional
        One density per condition (the first axis of ``observations``).
    fixed : mapping str -> float, optional
        Parameters held fixed (``beta`` when only payoff parameters are fitted).
    objective : {"max-entropy", "min-information"}
    phenotypes : sequence of str, optional
        Phenotype names (checked against a mapping payoff and a table's ``phenotype`` column).
    start : mapping str -> float, optional
        First start of the optimiser (default: the middle of each bound); must lie in bounds.
    starts : int
        Number of starts: the first, then Latin-hypercube points in the bounds (seeded).
    seed : int or numpy.random.Generator
        Seeds the extra starts and the bootstrap.
    bootstrap : int
        Parametric bootstrap replicates (0: none): data simulated from the fit with the
        observed row totals, refitted; percentile intervals in ``bootstrap_intervals``.
    posterior : int
        Posterior draws (0: none) by NumPyro's NUTS sampler with uniform priors on the bounds
        (needs the ``bayes`` extra); as many warm-up steps; draws in ``posterior``.

    Returns
    -------
    Calibration

    Notes
    -----
    The log-likelihood is ``l = sum n(y, x) log q_obs(x | y)`` (or ``sum n(x) log f(x)``),
    maximised by L-BFGS-B within the bounds from every start, the best polished by Newton
    steps. Its gradient is exact in ``beta`` and the payoff table (JAX; the min-information
    marginal by implicit differentiation at the solver's solution); a callable payoff is
    differentiated in its own parameters by central differences. The 95% interval of each
    free parameter is the set where the profile log-likelihood (the others re-maximised)
    falls by at most ``chi2_1(0.95) / 2 = 1.920729`` (Wilks 1938). A profile that does not
    fall that far inside the bounds on one side leaves that end infinite and the parameter
    not identifiable (Raue et al. 2009); under max-entropy only ``beta * u`` enters the law,
    so ``beta`` and a common payoff scale are never both identifiable.

    The deviance is ``2 (l_sat - l)`` against a free distribution per observed (density,
    state) row, with ``rows (n - 1) - k`` degrees of freedom (chi-square approximation; rows
    with few cells make it rough). AIC ``2k - 2l`` (Akaike 1974) and BIC ``k ln N - 2l``
    (Schwarz 1978) compare the law with a free multinomial logit ``a_x + b_x v(s)`` in the
    signal value ``v``.

    References
    ----------
    Wilks, S. S. (1938). Ann. Math. Stat. 9:60–62.
    Akaike, H. (1974). IEEE Trans. Autom. Control 19:716–723.
    Schwarz, G. (1978). Ann. Stat. 6:461–464.
    Raue, A. et al. (2009). Bioinformatics 25:1923–1929 (profile-likelihood identifiability;
    cited from memory).
    """
    from threadpoolctl import threadpool_limits

    # The optimiser's small dense algebra runs far slower on several BLAS threads when the
    # machine is busy (measured 10x on 2 shared cores); one thread is also the fastest idle.
    with threadpool_limits(limits=1, user_api="blas"):
        return _calibrate(observations, payoff, environment, free=free, densities=densities, fixed=fixed,
                          objective=objective, phenotypes=phenotypes, start=start, starts=starts,
                          seed=seed, bootstrap=bootstrap, posterior=posterior)


def _calibrate(observations, payoff, environment, *, free, densities, fixed, objective, phenotypes,
               start, starts, seed, bootstrap, posterior) -> Calibration:
    objective = choice(objective, "objective", OBJECTIVES)
    bounds_map, fixed_values, start_values = _check_parameters(payoff, free, fixed, start)
    if isinstance(starts, bool) or not isinstance(starts, (int, np.integer)) or starts < 1:
        raise InputError(f"`starts` must be an integer >= 1 (got {starts!r})")
    if isinstance(bootstrap, bool) or not isinstance(bootstrap, (int, np.integer)) or bootstrap < 0:
        raise InputError(f"`bootstrap` must be an integer >= 0 (got {bootstrap!r})")
    if isinstance(posterior, bool) or not isinstance(posterior, (int, np.integer)) or posterior < 0:
        raise InputError(f"`posterior` must be an integer >= 0 (got {posterior!r})")
    if not callable(environment) and not isinstance(environment, Environment):
        raise InputError(
            "`environment` must be an Environment or a callable density -> Environment "
            f"(got {type(environment).__name__})"
        )
    names = tuple(bounds_map)
    bounds = [bounds_map[name] for name in names]
    payoff_names = [name for name in names if name not in BETA_NAMES]
    initial = {name: start_values.get(name, 0.5 * sum(bounds_map[name])) for name in payoff_names}
    initial.update({k: v for k, v in fixed_values.items() if k not in BETA_NAMES})
    has_params = bool(initial)
    payoff_start = payoff(**initial) if has_params else payoff
    phenotype_names, data = _observations(observations, payoff_start, environment, densities, phenotypes)
    problem = _Problem(payoff, environment, data, names, fixed_values, objective, phenotypes,
                       has_params=has_params)

    # Fit from every start; keep the best.
    results = []
    for point in _starts(bounds, start_values, names, int(starts), seed):
        problem._starts = None
        results.append(_maximise(problem, point, bounds))
    theta, value = max(results, key=lambda tv: tv[1] if np.isfinite(tv[1]) else -np.inf)
    if not np.isfinite(value):
        raise InputError(
            "`observations` are impossible under the law at every start: an observed phenotype "
            "has probability zero (check the objective, bounds and phenotype order)"
        )
    theta, value = _polish(problem, theta, value, bounds)
    reached = sum(1 for _, v in results if np.isfinite(v) and value - v <= 1e-6 * max(1.0, abs(value)))

    # Wald standard errors and profiles.
    H = _hessian(problem, theta, bounds)
    try:
        covariance = np.linalg.inv(-H)
        se = np.sqrt(np.where(np.diag(covariance) > 0, np.diag(covariance), np.nan))
    except np.linalg.LinAlgError:
        se = np.full(theta.size, np.nan)
    for attempt in range(3):
        intervals, profiles, identifiable = {}, {}, {}
        improved = None
        for j, name in enumerate(names):
            (lo, hi), profile = _profile(problem, j, theta, value, bounds, se[j])
            if attempt < 2 and profile.drops.min() < -1e-9 * max(1.0, abs(value)):
                improved = profile.others[int(np.argmin(profile.drops))]
                break
            intervals[name] = (lo, hi)
            profiles[name] = profile
            identifiable[name] = bool(np.isfinite(lo) and np.isfinite(hi))
        if improved is None:
            break
        # A profile found a higher likelihood than the fit: refit from there, profile again
        # (the third pass keeps its profiles; the gradient check below then judges the fit).
        theta, value = _polish(problem, *_maximise(problem, improved, bounds), bounds)
    gradient = _projected_gradient(problem, theta, bounds)
    converged = gradient <= TOLERANCE
    status = "converged" if converged else "not-converged"
    message = (
        f"projected gradient {gradient:.2e} per cell (tolerance {TOLERANCE:g}); "
        f"{reached} of {len(results)} starts reached the optimum"
    )
    weak = [name for name in names if not identifiable[name]]
    if weak:
        warnings.warn(
            f"not identifiable from these data: {', '.join(weak)} (the profile likelihood does not "
            f"fall by {CUTOFF:.6f} within the bounds on both sides; beta and a common payoff scale "
            "enter the law only as a product)",
            stacklevel=3,  # the caller of calibrate()
        )

    # Goodness of fit and the verdict.
    k = len(names)
    l_sat, rows = _saturated(data)
    n = data.counts.shape[-1]
    df = rows * (n - 1) - k
    deviance = max(0.0, 2.0 * (l_sat - value))
    from scipy.stats import chi2

    p_value = float(chi2.sf(deviance, df)) if df > 0 else float("nan")
    alternative = _logit_alternative(problem)
    verdict = _verdict(objective, k, value, alternative, problem.cells)

    # Fractions, bands, law.
    _, fitted = problem.probabilities(theta)
    totals = data.counts.sum(axis=1) if data.kind == "states" else data.counts
    totals = totals if totals.ndim == 2 else totals[None]
    observed = totals / np.maximum(totals.sum(axis=1, keepdims=True), 1.0)
    inside = [p.others[p.drops <= CUTOFF * (1 + 1e-9)] for p in profiles.values()]
    envelope = np.stack([problem.probabilities(t)[1] for t in np.concatenate(inside)] + [fitted])
    band = np.stack([envelope.min(axis=0), envelope.max(axis=0)], axis=-1)

    boot_intervals, boot_estimates = None, None
    if bootstrap:
        boot_estimates, boot_fractions = _bootstrap(problem, theta, bounds, int(bootstrap), seed)
        boot_intervals = {name: (float(np.quantile(boot_estimates[:, j], 0.025)),
                                 float(np.quantile(boot_estimates[:, j], 0.975))) for j, name in enumerate(names)}
        band = np.stack([np.quantile(boot_fractions, 0.025, axis=0),
                         np.quantile(boot_fractions, 0.975, axis=0)], axis=-1)

    draws = None
    if posterior:
        from ._posterior import sample_posterior

        draws = sample_posterior(problem, theta, bounds, int(posterior), seed)

    beta, params = problem.split(theta)
    fitted_payoff = problem.payoff_at(params)
    law = None
    if data.densities is not None:
        grid = np.unique(data.densities)
        law = derive_law(fitted_payoff, environment, densities=grid, beta=beta, objective=objective,
                         phenotypes=phenotypes)

    return Calibration(
        estimates={name: float(t) for name, t in zip(names, theta)},
        intervals=intervals,
        identifiable=identifiable,
        standard_errors={name: float(s) for name, s in zip(names, se)},
        log_likelihood=float(value),
        aic=float(2 * k - 2 * value),
        bic=float(k * math.log(problem.cells) - 2 * value),
        deviance=float(deviance),
        deviance_df=int(df),
        deviance_p_value=p_value,
        saturated_log_likelihood=l_sat,
        alternative=alternative,
        verdict=verdict,
        law=law,
        profiles=profiles,
        densities=data.densities,
        phenotypes=tuple(phenotype_names),
        observed_fractions=observed,
        fitted_fractions=fitted,
        fraction_band=band,
        cells=int(round(problem.cells)),
        objective=objective,
        fixed=fixed_values,
        bounds=bounds_map,
        bootstrap_intervals=boot_intervals,
        bootstrap_estimates=boot_estimates,
        posterior=draws,
        converged=bool(converged),
        status=status,
        message=message,
        tolerance=TOLERANCE,
        starts=len(results),
        payoff=fitted_payoff,
        environment=environment,
    )


def _bootstrap(problem: _Problem, theta, bounds, replicates: int, seed):
    """Parametric bootstrap: refit data simulated from the fit with the observed row totals."""
    generator = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    q, _ = problem.probabilities(theta)
    counts = problem.data.counts
    flat_q = q.reshape(-1, q.shape[-1])
    totals = counts.reshape(-1, counts.shape[-1]).sum(axis=1).astype(np.int64)
    original = problem.data
    estimates, fractions = [], []
    try:
        for _ in range(replicates):
            simulated = np.stack([generator.multinomial(t, p / p.sum()) for t, p in zip(totals, flat_q)])
            problem.data = Data(original.kind, simulated.reshape(counts.shape).astype(float), original.densities)
            problem._starts = None
            fit, _ = _maximise(problem, theta.copy(), bounds)
            estimates.append(fit)
            fractions.append(problem.probabilities(fit)[1])
    finally:
        problem.data = original
    return np.array(estimates), np.array(fractions)
