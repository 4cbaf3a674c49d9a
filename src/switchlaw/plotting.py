"""Plot helpers: ``fn(result, ...) -> axes``. Matplotlib is imported only when called."""

from __future__ import annotations

import numpy as np


def _axes(ax, *, figsize):
    """The caller's axes, or new ones of ``figsize`` inches (matplotlib imported here)."""
    if ax is not None:
        return ax
    import matplotlib.pyplot as plt

    _, ax = plt.subplots(figsize=figsize, constrained_layout=True)
    return ax


def plot_law(law, *, phenotype=None, axes=None):
    """The law as a heat map over state x density, and the mean-field fractions against density.

    Parameters
    ----------
    law : SwitchingLaw
    phenotype : str or int, optional
        Phenotype shown in the heat map (default: the second one, or the only one).
    axes : pair of matplotlib Axes, optional
        Created side by side if not given.

    Returns
    -------
    tuple of Axes
        ``(heat_map_axes, fractions_axes)``.
    """
    import matplotlib.pyplot as plt

    if axes is None:
        _, axes = plt.subplots(1, 2, figsize=(10, 4), constrained_layout=True)
    heat, lines = axes
    names = list(law.phenotypes)
    if phenotype is None:
        index = 1 if len(names) > 1 else 0
    else:
        index = phenotype if isinstance(phenotype, (int, np.integer)) else names.index(phenotype)
    states = np.arange(law.states.size)
    image = heat.pcolormesh(
        law.densities, states, law.table[:, :, index].T, shading="nearest",
        vmin=0.0, vmax=1.0, cmap="viridis",
    )
    heat.figure.colorbar(image, ax=heat, label=f"q({names[index]} | state, density)")
    heat.set_xlabel("density")
    # Ticks always name what a state stands for: the signal value (for a Poisson receptor the
    # count divided by the gain), never a bare row index; at most about 10 of them.
    values = law.state_values if law.state_values.ndim == 1 else None
    shown = np.unique(np.linspace(0, states.size - 1, min(states.size, 10)).round().astype(int))
    if values is not None:
        heat.set_ylabel("sensed signal value y")
        heat.set_yticks(states[shown], [f"{values[k]:.3g}" for k in shown])
    else:
        heat.set_ylabel("sensed state")
        heat.set_yticks(states[shown], [str(law.states[k]) for k in shown])
    heat.set_title(f"probability of {names[index]}")
    fractions = np.einsum("ky,kyx->kx", law.state_probs, law.table)
    for j, name in enumerate(names):
        lines.plot(law.densities, fractions[:, j], label=name)
    lines.set_xlabel("density")
    lines.set_ylabel("mean-field fraction")
    lines.set_ylim(-0.02, 1.02)
    lines.set_title("mean-field fractions (averaged over states)")
    lines.legend(frameon=False)
    return heat, lines


def plot_tradeoff(curve, *, ax=None, phenotypes=None):
    """The information–payoff curve with its critical betas marked.

    Parameters
    ----------
    curve : Tradeoff
    ax : matplotlib Axes, optional
    phenotypes : sequence of str, optional
        Names used when labelling which phenotypes enter or leave.

    Returns
    -------
    Axes
    """
    ax = _axes(ax, figsize=(5, 4))

    def name(x):
        return str(phenotypes[x]) if phenotypes is not None else str(x)

    order = np.argsort(curve.betas)
    ax.plot(curve.information_bits[order], curve.expected_payoff[order], marker=".", lw=1.5)
    ax.set_xlabel("information I(X;Y) (bits)")
    ax.set_ylabel("expected payoff E[u]")
    for i, critical in enumerate(curve.critical_betas):
        change = ", ".join(
            [f"+{name(x)}" for x in critical.entering] + [f"−{name(x)}" for x in critical.leaving]
        )
        ax.annotate(f"critical β = {critical.beta:.4g} (phenotypes {change})",
                    xy=(0.02, 0.95 - 0.06 * i), xycoords="axes fraction", fontsize=8)
    ax.set_title("information–payoff trade-off")
    return ax


def plot_bifurcation(diagram, *, ax=None):
    """Equilibrium density against beta: stable branches solid, unstable dashed, critical points marked.

    Parameters
    ----------
    diagram : BifurcationDiagram
    ax : matplotlib Axes, optional

    Returns
    -------
    Axes
    """
    ax = _axes(ax, figsize=(6, 4))
    lo, hi = diagram.value_range
    label = "β" if diagram.parameter == "beta" else diagram.parameter
    # The zero state changes stability only at transcritical points: draw it in pieces
    # between them, each styled by the stability sampled inside it.
    samples = np.asarray(diagram.zero_values)
    stable_zero = np.asarray(diagram.zero_stable)
    cuts = [lo] + sorted(c.value for c in diagram.critical_points if c.kind == "transcritical") + [hi]
    for a, b in zip(cuts[:-1], cuts[1:]):
        inside = (samples > a) & (samples < b)
        stable = bool(stable_zero[inside][0]) if inside.any() else bool(
            stable_zero[np.argmin(np.abs(samples - 0.5 * (a + b)))])
        ax.plot([a, b], [0.0, 0.0], "-" if stable else "--", color="k", lw=1.5)
    for branch in diagram.branches:
        for mask, style in ((branch.stable, "-"), (~branch.stable, "--")):
            segment = np.where(mask, branch.densities, np.nan)
            ax.plot(branch.values, segment, style, color="C0", lw=1.8)
    for point in diagram.critical_points:
        marker = "o" if point.kind == "fold" else "s"
        ax.plot(point.value, point.density, marker, color="C3", ms=6)
        ax.annotate(f"{point.kind}\n{label}={point.value:.4g}", (point.value, point.density),
                    textcoords="offset points", xytext=(4, 6), fontsize=8, color="C3")
    ax.plot([], [], "-", color="k", label="stable")
    ax.plot([], [], "--", color="k", label="unstable")
    ax.set_xlim(lo, hi)
    ax.set_ylim(-0.03, 1.03)
    ax.set_xlabel("β (nats per payoff unit)" if label == "β" else diagram.parameter)
    ax.set_ylabel("equilibrium density")
    ax.set_title(f"equilibria against {label}")
    ax.legend(frameon=False, loc="upper left")
    return ax


#: Colours of the regimes in regime maps (our own choice).
REGIME_COLOURS = {
    "extinction": "#8c8c8c",
    "monostable": "#4c9f70",
    "weak-allee": "#e0b040",
    "strong-allee": "#c0504d",
}


def plot_regime_map(regime_map, *, ax=None):
    """Regimes over beta x a second parameter, with the critical-beta curves drawn on top.

    Parameters
    ----------
    regime_map : RegimeMap
    ax : matplotlib Axes, optional

    Returns
    -------
    Axes
    """
    import matplotlib.pyplot as plt
    from matplotlib.colors import ListedColormap
    from matplotlib.patches import Patch

    from .population import REGIMES

    if ax is None:
        _, ax = plt.subplots(figsize=(6, 4.5), constrained_layout=True)
    cmap = ListedColormap([REGIME_COLOURS[name] for name in REGIMES])
    ax.pcolormesh(regime_map.betas, regime_map.values, regime_map.codes, cmap=cmap,
                  vmin=-0.5, vmax=len(REGIMES) - 0.5, shading="nearest")
    for kind, marker, style in (("transcritical", "s", "-"), ("fold", "o", "--")):
        xs = [c.beta for row in regime_map.critical for c in row if c.kind == kind]
        ys = [v for v, row in zip(regime_map.values, regime_map.critical) for c in row if c.kind == kind]
        if xs:
            # The boundaries themselves: the k-th critical beta of this kind in each row, joined
            # from row to row (broken where a row has fewer), over the colour cells.
            per_row = [sorted(c.beta for c in row if c.kind == kind) for row in regime_map.critical]
            for k in range(max(len(r) for r in per_row)):
                curve = [r[k] if len(r) > k else np.nan for r in per_row]
                ax.plot(curve, regime_map.values, style, color="k", lw=1.2)
            ax.plot(xs, ys, marker, ms=2.5, color="k", label=f"{kind} (computed)")
    handles = [Patch(color=REGIME_COLOURS[name], label=name) for name in REGIMES]
    ax.legend(handles=handles + ax.get_legend_handles_labels()[0], frameon=True, fontsize=8,
              loc="upper right")
    ax.set_xlabel("β (nats per payoff unit)")
    ax.set_ylabel(regime_map.parameter)
    ax.set_title("population regimes")
    return ax


def plot_front_profiles(run, *, times=None, axes=None):
    """Density profiles of each phenotype at several times, one panel per phenotype.

    Parameters
    ----------
    run : FrontRun
    times : sequence of float, optional
        Times to draw (the nearest saved ones; default five evenly spaced).
    axes : sequence of matplotlib Axes, optional
        One per phenotype; created side by side if not given.

    Returns
    -------
    list of Axes
    """
    import matplotlib.pyplot as plt

    names = list(run.phenotypes)
    if axes is None:
        _, axes = plt.subplots(1, len(names), figsize=(4.5 * len(names), 3.5), sharey=True,
                               constrained_layout=True, squeeze=False)
        axes = list(axes[0])
    wanted = np.linspace(run.times[0], run.times[-1], 5) if times is None else np.asarray(times, float)
    frames = sorted({int(np.argmin(np.abs(run.times - t))) for t in wanted})
    colours = plt.cm.viridis(np.linspace(0.0, 0.9, len(frames)))
    for k, (ax, name) in enumerate(zip(axes, names)):
        for colour, i in zip(colours, frames):
            ax.plot(run.x, run.profiles[i, :, k], color=colour, label=f"t = {run.times[i]:.3g}")
        ax.set_xlabel("radius" if run.dimension > 1 else "position x")
        ax.set_title(name)
    axes[0].set_ylabel("density")
    axes[0].legend(frameon=False, fontsize=8)
    return list(axes)


def plot_front_position(run, *, ax=None):
    """Front position against time, with the fitted window and the linear-speed line.

    Parameters
    ----------
    run : FrontRun
    ax : matplotlib Axes, optional

    Returns
    -------
    Axes
    """
    ax = _axes(ax, figsize=(5.5, 4))
    ax.plot(run.times, run.positions, color="k", label="front position")
    ax.axvspan(*run.window, color="0.9", label="fitted window")
    if np.isfinite(run.linear_speed):
        i = int(np.argmin(np.abs(run.times - run.window[1])))
        ax.plot(run.times, run.positions[i] + run.linear_speed * (run.times - run.times[i]), "--",
                color="tab:blue", label=f"slope c* = {run.linear_speed:.4g}")
    ax.set_xlabel("time")
    ax.set_ylabel("front position")
    ax.set_title(f"{run.kind} front, speed {run.speed:.4g}")
    ax.legend(frameon=False, fontsize=8)
    return ax


#: Marker of each front kind in :func:`plot_front_speeds`.
FRONT_MARKERS = {"pulled": "o", "pushed": "^", "stalled": "s", "retreating": "v"}


def plot_front_speeds(scan, *, ax=None):
    """Front speed against beta with the linear speed ``c*`` and each point's kind marked.

    Parameters
    ----------
    scan : FrontScan, xarray.Dataset or sequence of FrontRun
        A speed scan of :func:`~switchlaw.front_study`, a one-dimensional beta scan of
        :class:`~switchlaw.FrontSummary`, or front runs.
    ax : matplotlib Axes, optional

    Returns
    -------
    Axes
    """
    ax = _axes(ax, figsize=(5.5, 4))
    if hasattr(scan, "linear_speeds"):  # FrontScan
        betas, speeds, linear, kinds = scan.betas, scan.speeds, scan.linear_speeds, list(scan.kinds)
    elif hasattr(scan, "data_vars"):
        betas = np.asarray(scan["beta"].values, float)
        speeds = np.asarray(scan["front_speed"].values, float)
        linear = np.asarray(scan["linear_speed"].values, float)
        kinds = [str(k) for k in np.asarray(scan["front_kind"].values).ravel()]
    else:
        betas = np.array([r.beta for r in scan])
        speeds = np.array([r.speed for r in scan])
        linear = np.array([r.linear_speed for r in scan])
        kinds = [r.kind for r in scan]
    ax.plot(betas, linear, color="tab:blue", label="linear speed c*")
    kinds_array = np.array(kinds)
    for kind, marker in FRONT_MARKERS.items():
        chosen = kinds_array == kind
        if chosen.any():
            ax.plot(betas[chosen], speeds[chosen], marker, ls="none", color="k", ms=5, label=kind)
    ax.axhline(0.0, color="0.6", lw=0.8)
    ax.set_xlabel("β (nats per payoff unit)")
    ax.set_ylabel("front speed (length per unit time)")
    ax.legend(frameon=False, fontsize=8)
    return ax


def plot_calibration(calibration, *, ax=None):
    """Observed against fitted phenotype fractions by density, with the 95% band.

    Parameters
    ----------
    calibration : Calibration
    ax : matplotlib Axes, optional

    Returns
    -------
    Axes

    Notes
    -----
    Points are the observed fractions, lines the fitted ones; the shaded band is the
    calibration's ``fraction_band`` (envelope over the profile paths inside the 95% cut-off,
    or bootstrap quantiles).
    """
    ax = _axes(ax, figsize=(5, 3.5))
    x = calibration.densities if calibration.densities is not None else np.arange(calibration.observed_fractions.shape[0])
    order = np.argsort(x)
    for j, name in enumerate(calibration.phenotypes):
        line, = ax.plot(x[order], calibration.fitted_fractions[order, j], label=f"{name} (fitted)")
        ax.fill_between(x[order], calibration.fraction_band[order, j, 0], calibration.fraction_band[order, j, 1],
                        color=line.get_color(), alpha=0.25, linewidth=0)
        ax.plot(x[order], calibration.observed_fractions[order, j], "o", color=line.get_color(),
                markersize=4, label=f"{name} (observed)")
    ax.set_xlabel("density" if calibration.densities is not None else "condition")
    ax.set_ylabel("phenotype fraction")
    ax.set_ylim(-0.02, 1.02)
    ax.set_title("observed and fitted fractions (95% band)")
    ax.legend(frameon=False, fontsize="small")
    return ax


def plot_profiles(calibration, parameter=None, *, ax=None):
    """The profile log-likelihood drop of one free parameter, with the 95% cut-off line.

    Parameters
    ----------
    calibration : Calibration
    parameter : str, optional
        Default: the first free parameter.
    ax : matplotlib Axes, optional

    Returns
    -------
    Axes
    """
    ax = _axes(ax, figsize=(4, 3.2))
    name = next(iter(calibration.profiles)) if parameter is None else parameter
    profile = calibration.profiles[name]
    ax.plot(profile.values, profile.drops, "-o", markersize=3)
    ax.axhline(profile.cutoff, color="0.4", linestyle="--", label=f"95% cut-off {profile.cutoff:.4f}")
    ax.axvline(calibration.estimates[name], color="0.6", linestyle=":")
    ax.set_xlabel(name)
    ax.set_ylabel("fall in log-likelihood (nats)")
    ax.set_ylim(bottom=-0.05 * profile.cutoff)
    ax.legend(frameon=False, fontsize="small")
    return ax
