"""Figures of the optional stages (extinction, lattice, fluctuating, schedule, sensitivity, variants).

Each function takes the stage's result dict from :mod:`._stages` and returns
``[(name, figure, caption)]``; the caption says what to look for. Nothing is saved here.
"""

from __future__ import annotations

import numpy as np

TREATMENT_CAUTION = ("Research use only: a hypothesis about cell populations under stated assumptions, "
                     "not a prediction or advice for any patient or treatment; defer to clinical practice.")


def _plt():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def extinction(ext: dict) -> list:
    plt = _plt()
    fig, ax = plt.subplots(figsize=(6.2, 4.0), constrained_layout=True)
    every = np.arange(1, ext["established"])
    for k, entry in enumerate(ext["curves"]):
        colour = f"C{k}"
        exact = entry["exact"]
        ax.plot(exact.sizes, exact.probability, "-o", ms=3, color=colour,
                label=f"β = {entry['beta']:.3g}: exact (fast switching)")
        if exact.half is not None:
            ax.axvline(exact.half, color=colour, lw=0.8, ls=":")
        sim = entry["simulated"]
        if sim is not None:
            err = np.abs(sim.interval.T - sim.probability)
            ax.errorbar(sim.sizes, sim.probability, yerr=err, fmt="s", ms=4, mfc="none", color=colour, capsize=2,
                        label=f"β = {entry['beta']:.3g}: simulated, τ = {entry['tau']:g} (95 % interval)")
    ax.axhline(0.5, color="0.6", lw=0.8)
    if every.size > 20 and ext["founders"][-1] / ext["founders"][0] > 8:
        from matplotlib.ticker import NullFormatter, ScalarFormatter

        ax.set_xscale("log")
        ax.set_xticks(ext["founders"])  # the founder sizes themselves, as plain numbers
        ax.xaxis.set_major_formatter(ScalarFormatter())
        ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel("founding cells n₀")
    ax.set_ylabel(f"P(die out before {ext['established']} cells)")
    ax.set_ylim(-0.02, 1.02)
    ax.legend(fontsize=7)
    ax.set_title("extinction risk of a founding population")
    caption = ("Probability that a founding population dies out before it reaches the established size, "
               "against the number of founders. Look for where each curve crosses one half (dotted lines): "
               "founder groups larger than that usually establish. Squares are stochastic simulations with "
               "their 95 % Wilson intervals; they should straddle the exact curve when switching is fast.")
    return [("extinction", fig, caption)]


def lattice(lat: dict) -> list:
    from matplotlib.colors import ListedColormap

    plt = _plt()
    run = lat["run"]
    shots = lat["snapshot_times"]
    names = run.phenotypes
    colours = ["#ffffff"] + [plt.get_cmap("tab10")(k) for k in range(len(names))]
    fig, axes = plt.subplots(1, shots.size, figsize=(2.3 * shots.size, 2.6), constrained_layout=True)
    for ax, k in zip(np.atleast_1d(axes), range(shots.size)):
        ax.imshow(run.snapshots[k, 0], cmap=ListedColormap(colours), vmin=-0.5, vmax=len(names) + 0.5,
                  interpolation="nearest")
        ax.set_title(f"t = {shots[k]:.3g}\nclustering {lat['clustering'][k]:.2f}", fontsize=8)
        ax.set_xticks([])
        ax.set_yticks([])
    from matplotlib.patches import Patch

    fig.legend(handles=[Patch(color=colours[k + 1], label=n) for k, n in enumerate(names)], fontsize=7,
               loc="outside lower center", ncols=len(names))
    snaps = ("Snapshots of the first replicate (white: empty site; colours: phenotypes). The clustering is "
             "P(neighbour occupied | occupied) / density: 1 for cells placed at random, above 1 where "
             "daughters crowd next to their mothers. Look for patches that mean field cannot see.")
    if lat["lattice"].neighbourhood == "hexagonal":
        snaps += " Hexagonal rows are drawn as a square grid: odd rows sit half a site to the right."
    cmp_ = lat["comparison"]
    fig2, ax = plt.subplots(figsize=(6.2, 3.8), constrained_layout=True)
    ax.plot(cmp_.times, cmp_.predicted, color="k", lw=1.2, label="mean field (the law's compartments)")
    ax.plot(cmp_.times, cmp_.measured, color="C0", label=f"lattice, mean of {run.counts.shape[0]} replicates")
    if np.isfinite(cmp_.standard_error).any():
        ax.fill_between(cmp_.times, cmp_.measured - 2 * cmp_.standard_error,
                        cmp_.measured + 2 * cmp_.standard_error, color="C0", alpha=0.25, lw=0,
                        label="± 2 standard errors")
    ax.set_xlabel("time (time units)")
    ax.set_ylabel("density (fraction of sites)")
    ax.legend(fontsize=7)
    ax.set_title("lattice agents against mean field")
    density = ("Density of the lattice agents against the mean-field prediction with the same law. Look "
               "at the gap: where the band leaves the black line, clustering or local crowding changes "
               "what the cells sense and the mean-field model is not enough.")
    return [("lattice_snapshots", fig, snaps), ("lattice_density", fig2, density)]


def fluctuating(flu: dict) -> list:
    plt = _plt()
    curve = flu["curve"]
    fig, ax = plt.subplots(figsize=(6.2, 4.0), constrained_layout=True)
    ax.plot(curve.betas, curve.growth_rate, color="C0", label="long-run growth of the law")
    ax.plot(curve.betas, curve.net_growth, color="C1", label=f"net of {curve.cost_per_bit:g} nats/bit")
    ax.axhline(flu["hedging"].growth_rate, color="C2", ls="--", lw=1, label="best bet hedging, no cue")
    ax.axhline(flu["with_cue"].growth_rate, color="C3", ls=":", lw=1, label="best strategy with the cue")
    ax.plot([curve.best_beta], [curve.best_net_growth], "o", color="C1", label=f"best β = {curve.best_beta:.3g}")
    if flu["beta"] is not None:
        ax.axvline(flu["beta"], color="0.5", lw=0.8, ls=":")
    finite = np.concatenate([curve.net_growth[np.isfinite(curve.net_growth)],
                             curve.growth_rate[np.isfinite(curve.growth_rate)]])
    if finite.size:
        ax.set_ylim(min(finite.min(), flu["hedging"].growth_rate) - 0.05,
                    max(finite.max(), flu["with_cue"].growth_rate) + 0.05)
    ax.set_xlabel("β (nats per payoff unit)")
    ax.set_ylabel("growth (nats per generation)")
    ax.legend(fontsize=7)
    ax.set_title("growth in the fluctuating environment")
    caption = ("Long-run growth of the derived law along β, and net of the sensing cost. Look for the peak "
               "of the net curve (the β worth paying for) and how close the law comes to the best strategy "
               "with the cue (dotted); below the dashed line the law does worse than blind bet hedging.")
    return [("fluctuating", fig, caption)]


def schedule(sch: dict, names, treatment: bool) -> list:
    plt = _plt()
    plans = sch["plans"]
    fig, axes = plt.subplots(2, 1, figsize=(6.8, 5.2), sharex=True, constrained_layout=True)
    k = sch["tolerant_index"]
    for i, entry in enumerate(plans):
        run, plan = entry["run"], entry["plan"]
        axes[0].plot(run.times, run.density, color=f"C{i}", label=plan.name)
        axes[1].plot(run.times, run.fractions[:, k], color=f"C{i}")
        for a, b in run.stress_periods:
            for ax in axes:
                ax.axvspan(a, b, ymin=0.97 - 0.04 * i, ymax=1.0 - 0.04 * i, color=f"C{i}", alpha=0.8, lw=0)
    axes[0].axhline(plans[0]["run"].regrowth_density, color="0.5", ls=":", lw=0.8, label="regrowth level")
    axes[0].set_ylabel("density (fraction of sites)")
    axes[0].legend(fontsize=7)
    axes[1].set_ylabel(f"fraction {names[k]}")
    axes[1].set_xlabel("time (time units); bars at the top: stress on")
    axes[0].set_title("mean-field model under the stress schedules")
    caption = ("Density (top) and the fraction of the tolerant phenotype (bottom) under each schedule; the "
               "bars at the top of each panel mark when the stress is on. Look at how far the density falls "
               "in each stress period, how quickly cells turn tolerant, and whether the density climbs back "
               "to the regrowth level after the last period.")
    if treatment:
        caption += " " + TREATMENT_CAUTION
    return [("schedule", fig, caption)]


def sensitivity(sen: dict) -> list:
    plt = _plt()
    out = []
    rows = []
    for s in sen["sobol"]:
        if s["indices"] is None:
            continue
        for name, total, err in zip(s["indices"].names, s["indices"].total_order, s["indices"].total_order_error):
            rows.append((f"{name} → {s['output'].replace('_', ' ')}", float(total), float(err)))
    if rows:
        rows.sort(key=lambda r: r[1])
        fig, ax = plt.subplots(figsize=(6.2, 0.6 + 0.35 * len(rows)), constrained_layout=True)
        ax.barh([r[0] for r in rows], [r[1] for r in rows],
                xerr=[0 if not np.isfinite(r[2]) else r[2] for r in rows], color="C0")
        ax.set_xlabel("total-order Sobol' index (share of the output's variance)")
        ax.set_title("what matters most, over the declared ranges")
        out.append(("sensitivity_sobol", fig,
                    "Parameters ranked by their total-order Sobol' index (with bootstrap standard errors): "
                    "the share of each output's variance that goes away if the parameter were known. Look "
                    "at the top bars: those ranges are the ones worth narrowing by measurement."))
    local = [(f"d ρ*/d {p} at ρ* = {e['density']:.3g}", v) for e in sen["equilibria"]
             for p, v in e["derivatives"].items() if v is not None]
    local += [(f"d β_c/d {p} ({c['kind']} at β = {c['beta']:.3g})", v) for c in sen["critical"]
              for p, v in c["derivatives"].items() if v is not None]
    if local:
        local.sort(key=lambda r: abs(r[1]))
        fig, ax = plt.subplots(figsize=(6.8, 0.6 + 0.3 * len(local)), constrained_layout=True)
        ax.barh([r[0] for r in local], [r[1] for r in local], color=["C3" if r[1] < 0 else "C0" for r in local])
        ax.axvline(0, color="k", lw=0.6)
        ax.set_xlabel("derivative (output unit per parameter unit)")
        ax.set_title("local sensitivities at the study's β")
        out.append(("sensitivity_local", fig,
                    "Derivatives of the equilibria (ρ*, fraction of sites) and of the critical betas (β_c, "
                    "nats per payoff unit) with respect to the named parameters, largest at the top. Look for "
                    "long bars on a critical beta: a small change there moves the regime boundary."))
    return out


def variants(base_diagram, items) -> list:
    """Bifurcation diagrams of the study and each variant, overlaid."""
    from matplotlib.lines import Line2D

    plt = _plt()
    diagrams = [("study", base_diagram)] + [(name, r.diagram) for name, r in items]
    diagrams = [(n, d) for n, d in diagrams if d is not None]
    if len(diagrams) < 2:
        return []
    fig, ax = plt.subplots(figsize=(6.5, 4.2), constrained_layout=True)
    handles = []
    for i, (name, diagram) in enumerate(diagrams):
        colour = f"C{i}"
        for branch in diagram.branches:
            stable = np.asarray(branch.stable, dtype=bool)
            values, density = np.asarray(branch.values), np.asarray(branch.densities)
            for flag, style in ((True, "-"), (False, "--")):
                shown = np.where(stable == flag, density, np.nan)
                ax.plot(values, shown, style, color=colour, lw=1.3)
        for c in diagram.critical_points:
            ax.plot(c.value, c.density, "o" if c.kind == "fold" else "s", color=colour, ms=4)
        handles.append(Line2D([], [], color=colour, label=name))
    handles += [Line2D([], [], color="k", ls="-", label="stable"), Line2D([], [], color="k", ls="--", label="unstable")]
    ax.legend(handles=handles, fontsize=7)
    ax.set_xlabel("β (nats per payoff unit)")
    ax.set_ylabel("equilibrium density (fraction of sites)")
    ax.set_title("study and variants")
    caption = ("Equilibrium density against β for the study and each variant (solid: stable, dashed: "
               "unstable; squares transcritical points, circles folds). Look at where the curves separate: "
               "that is the range of β in which the variant's change matters.")
    return [("variants", fig, caption)]


def calibration(fit: dict) -> list:
    """The fit against the observed fractions and the profile likelihoods (drawn by the helper)."""
    drawn = fit["figures"]
    captions = {
        "calibration_fit": "Observed fraction of each phenotype (points) against the fitted law (line) "
                           "with its 95% band: look for points far outside the band.",
        "calibration_profiles": "Profile log-likelihood of each fitted parameter; the horizontal line is "
                                "the 95% cut-off (chi-square(1) 0.95 quantile / 2 = 1.92 below the "
                                "maximum), where it crosses are the interval's ends. A flat profile "
                                "means the data do not pin the parameter down.",
    }
    return [(name, drawn[name], captions[name]) for name in ("calibration_fit", "calibration_profiles")
            if name in drawn]


def front(entry: dict) -> list:
    """Profiles and position of the first run; speed against beta when the section scanned."""
    import switchlaw as sl

    plt = _plt()
    found = entry["study"]
    run = found.runs[0]
    made = []
    fig, axes = plt.subplots(1, len(run.phenotypes), figsize=(4.2 * len(run.phenotypes), 3.6),
                             constrained_layout=True, squeeze=False)
    sl.plot_front_profiles(run, axes=axes[0])
    made.append(("front_profiles", fig, f"Density of each phenotype along the domain at several times "
                 f"(β = {run.beta:.3g}): a front keeps its shape while it moves; look at which phenotype "
                 "leads at the edge."))
    fig, ax = plt.subplots(figsize=(5.5, 3.8), constrained_layout=True)
    sl.plot_front_position(run, ax=ax)
    made.append(("front_position", fig, "Front position against time; the speed is the slope over the "
                 "fitted window, beside the linear-speed line c*. A straight line means a steady front."))
    if found.scan is not None:
        fig, ax = plt.subplots(figsize=(5.5, 3.8), constrained_layout=True)
        sl.plot_front_speeds(found.scan, ax=ax)
        made.append(("front_speeds", fig, "Front speed against β with the linear speed c* and each point's "
                     "kind: pulled fronts sit on c*, pushed fronts above it."))
    return made
