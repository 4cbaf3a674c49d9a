"""Divide or move? A switching law from the information–payoff trade-off.

INVENTED SCENARIO (for demonstration only; no data behind it):

A cell on a hexagonal lattice senses how many of its 6 neighbour sites are occupied,
``y = 0..6``. In a well-mixed population at density 0.4 that count is Binomial(6, 0.4).
The cell chooses between two phenotypes, "divide" and "move" (the go-or-grow choice):

* dividing pays when there is free space for the daughter: ``u(y, divide) = 1 - y/6``;
* moving costs something but lets the cell escape a crowd, so it pays more the more
  neighbours there are: ``u(y, move) = 0.15 + 0.1 y``.

Dividing is better on average, and state by state it is better for ``y <= 3``; moving is
better for ``y >= 4``. The minimum-information law (minimise ``I(X;Y) - beta E[u]``) ignores
the cue below a critical beta and follows it more and more sharply above it.

Run::

    python examples/tradeoff_curve.py --out demo-output

It prints a summary and writes ``tradeoff.png`` and ``tradeoff.csv`` into ``--out``
(see docs/file-formats.md). Existing files are not overwritten unless ``--force`` is given.

Research software, not a medical device.
"""

from __future__ import annotations

import argparse
import csv
import io
import os
import sys
import tempfile
from pathlib import Path

import numpy as np
from scipy.stats import binom

import switchlaw

CAUTION = (
    "Research software, not a medical device: these are hypotheses about cell populations, "
    "not predictions or advice for any patient; defer to clinical practice."
)

#: Output files this script writes, relative to ``--out``.
OUTPUTS = ("tradeoff.png", "tradeoff.csv")

#: Invented scenario: hexagonal lattice, density 0.4, go-or-grow payoffs.
NEIGHBOURS = 6
DENSITY = 0.4
PHENOTYPES = ("divide", "move")

#: Beta grid: 0.1 to 100 nats per payoff unit, 60 points per decade.
BETAS = np.geomspace(0.1, 100.0, 181)


def scenario() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """States ``y``, their probabilities ``p(y)`` and the payoff table ``u[y, x]`` (invented)."""
    states = np.arange(NEIGHBOURS + 1)
    env = binom.pmf(states, NEIGHBOURS, DENSITY)
    env = env / env.sum()  # remove rounding so the sum is 1 to machine precision
    payoff = np.column_stack([1.0 - states / NEIGHBOURS, 0.15 + 0.1 * states])
    return states, env, payoff


def greedy_policy(payoff: np.ndarray) -> np.ndarray:
    """The beta -> infinity limit: each state takes its best phenotype (ties shared)."""
    best = (payoff >= payoff.max(axis=1, keepdims=True)).astype(float)
    return best / best.sum(axis=1, keepdims=True)


def summary(curve: switchlaw.Tradeoff, states: np.ndarray, payoff: np.ndarray,
            env: np.ndarray) -> str:
    """A short text summary of the trade-off curve."""
    lines = []
    if curve.critical_betas:
        for crit in curve.critical_betas:
            change = [f"{PHENOTYPES[i]} enters" for i in crit.entering]
            change += [f"{PHENOTYPES[i]} leaves" for i in crit.leaving]
            how = "exact, Kuhn-Tucker conditions" if crit.exact else "located numerically"
            lines.append(
                f"critical beta {crit.beta:.6g} nats per payoff unit ({how}): "
                f"{', '.join(change)}; equivalent sensing cost "
                f"{switchlaw.cost_from_beta(crit.beta):.4g} payoff units per bit"
            )
    else:
        lines.append("no critical beta in the scanned range")
    header = (
        f"{'beta':>8} {'cost/bit':>9} {'I (bits)':>9} {'E[u]':>7}  "
        + " ".join(f"y={y}".rjust(5) for y in states)
    )
    lines += ["", "q(divide | y) along the grid:", header]
    for i in range(0, curve.betas.size, 30):  # every half decade
        beta = curve.betas[i]
        row = " ".join(f"{q:5.3f}" for q in curve.probs_at(i)[:, 0])
        lines.append(
            f"{beta:8.3g} {switchlaw.cost_from_beta(beta):9.3g} "
            f"{curve.information_bits[i]:9.4f} {curve.expected_payoff[i]:7.4f}  {row}"
        )
    lines.append(
        f"at beta = {curve.betas[-1]:.3g} the cell uses {curve.information_bits[-1]:.4f} bits "
        f"and gains {curve.expected_payoff[-1] - (env @ payoff).max():+.4f} payoff units "
        f"over ignoring its neighbours"
    )
    greedy = greedy_policy(payoff)
    lines.append(
        f"(beta -> infinity limit: {switchlaw.mutual_information(env, greedy, unit='bits'):.4f} "
        f"bits, E[u] = {env @ (greedy * payoff).sum(axis=1):.4f})"
    )
    if not curve.converged.all():
        lines.append(f"WARNING: {int((~curve.converged).sum())} betas did not converge")
    return "\n".join(lines)


def csv_text(curve: switchlaw.Tradeoff, states: np.ndarray) -> str:
    """One row per beta; see docs/file-formats.md."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(
        ["beta", "cost_per_bit", "information_bits", "conditional_entropy_bits",
         "expected_payoff", "fraction_divide", "fraction_move"]
        + [f"q_divide_y{y}" for y in states]
        + ["converged"]
    )
    for i, beta in enumerate(curve.betas):
        writer.writerow(
            [repr(float(beta)), repr(switchlaw.cost_from_beta(beta)),
             repr(float(curve.information_bits[i])),
             repr(float(curve.conditional_entropy_bits[i])),
             repr(float(curve.expected_payoff[i])),
             repr(float(curve.marginals[i, 0])), repr(float(curve.marginals[i, 1]))]
            + [repr(float(q)) for q in curve.probs_at(i)[:, 0]]
            + [int(curve.converged[i])]
        )
    return buffer.getvalue()


def figure(curve: switchlaw.Tradeoff, states: np.ndarray, payoff: np.ndarray, env: np.ndarray):
    """Information–payoff curve and a heat map of q(divide | y) over beta x y."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, (left, right) = plt.subplots(1, 2, figsize=(11.5, 4.6), layout="constrained")
    fig.suptitle(
        "Divide or move on a hexagonal lattice (invented scenario): "
        "minimum-information switching law"
    )

    left.plot(curve.information_bits, curve.expected_payoff, color="tab:blue", lw=2)
    greedy = greedy_policy(payoff)
    greedy_payoff = env @ (greedy * payoff).sum(axis=1)
    left.axhline(greedy_payoff, color="0.5", ls=":", lw=1.2)
    left.axvline(switchlaw.mutual_information(env, greedy, unit="bits"), color="0.5", ls=":",
                 lw=1.2)
    left.text(0.01, greedy_payoff, "β → ∞ limit: best phenotype in every state",
              va="bottom", ha="left", fontsize=8, color="0.35")
    for beta in (6.0, 10.0, 20.0, 50.0):
        policy = switchlaw.solve(payoff, env, beta)
        left.plot(policy.information_bits, policy.expected_payoff, "o", color="tab:blue", ms=5)
        left.annotate(f"β = {beta:g}", (policy.information_bits, policy.expected_payoff),
                      xytext=(-7, 5), textcoords="offset points", ha="right", fontsize=8)
    for crit in curve.critical_betas:
        policy = switchlaw.solve(payoff, env, crit.beta)
        left.plot(policy.information_bits, policy.expected_payoff, marker="o", ms=11,
                  mfc="none", mec="crimson", mew=1.8, zorder=4)
        change = ", ".join([f"{PHENOTYPES[i]} enters" for i in crit.entering]
                           + [f"{PHENOTYPES[i]} leaves" for i in crit.leaving])
        left.annotate(
            f"critical β = {crit.beta:.4g}: {change}\n"
            f"(below it the cue is ignored, I = 0)",
            (policy.information_bits, policy.expected_payoff),
            xytext=(30, 6), textcoords="offset points", color="crimson", fontsize=9,
            va="center", arrowprops={"arrowstyle": "-", "color": "crimson"},
        )
    left.set_xlabel("information used, I(X;Y) (bits)")
    left.set_ylabel("expected payoff, E[u] (payoff units)")
    left.set_title("Information–payoff trade-off")
    left.grid(alpha=0.3)
    left.margins(y=0.1)

    edges = np.sqrt(curve.betas[1:] * curve.betas[:-1])
    edges = np.concatenate([[curve.betas[0] ** 2 / edges[0]], edges,
                            [curve.betas[-1] ** 2 / edges[-1]]])
    mesh = right.pcolormesh(
        edges, np.arange(states.size + 1) - 0.5, curve.probs[:, :, 0].T,
        cmap="RdBu", vmin=0.0, vmax=1.0, shading="flat",
    )
    right.set_xscale("log")
    right.set_yticks(states)
    for crit in curve.critical_betas:
        right.axvline(crit.beta, color="k", ls="--", lw=1.2)
        right.text(crit.beta * 1.08, states[-1] + 0.3, f"critical β = {crit.beta:.4g}",
                   va="top", ha="left", fontsize=9,
                   bbox={"boxstyle": "round", "fc": "white", "ec": "none", "alpha": 0.8})
    right.set_xlabel("β (nats per payoff unit)")
    right.set_ylabel("occupied neighbours y")
    right.set_title("Probability of dividing, q(divide | y)")
    fig.colorbar(mesh, ax=right, label="q(divide | y)   (1 - q = move)")
    return fig


def write_atomic(path: Path, write) -> None:
    """Write via a temporary file in the same folder, then move it into place."""
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(handle, "wb") as stream:
            write(stream)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temporary, 0o666 & ~umask)  # mkstemp creates 0600; use ordinary permissions
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        description="Divide-or-move trade-off curve on an invented hexagonal-lattice scenario.",
        epilog=CAUTION,
    )
    parser.add_argument("--out", default="demo-output", type=Path,
                        help="output folder (default: demo-output)")
    parser.add_argument("--force", action="store_true",
                        help="overwrite tradeoff.png and tradeoff.csv if they exist")
    args = parser.parse_args(argv)

    targets = [args.out / name for name in OUTPUTS]
    existing = [str(t) for t in targets if t.exists()]
    if existing and not args.force:
        parser.error(f"refusing to overwrite {', '.join(existing)} (use --force)")
    args.out.mkdir(parents=True, exist_ok=True)

    states, env, payoff = scenario()
    print("switchlaw example: divide or move on a hexagonal lattice (INVENTED scenario)")
    print(CAUTION)
    print()
    print(f"environment: occupied neighbours y = 0..{NEIGHBOURS} ~ "
          f"Binomial({NEIGHBOURS}, {DENSITY})")
    print("payoff: u(y, divide) = 1 - y/6,  u(y, move) = 0.15 + 0.1 y   (invented)")
    print(f"beta grid: {BETAS.size} values from {BETAS[0]:g} to {BETAS[-1]:g} "
          "nats per payoff unit")
    print()

    curve = switchlaw.tradeoff(payoff, env, BETAS)
    print(summary(curve, states, payoff, env))

    fig = figure(curve, states, payoff, env)
    write_atomic(targets[0], lambda stream: fig.savefig(stream, format="png", dpi=130))
    text = csv_text(curve, states)
    write_atomic(targets[1], lambda stream: stream.write(text.encode("utf-8")))
    print()
    print("wrote " + ", ".join(str(t) for t in targets))
    return 0


if __name__ == "__main__":
    sys.exit(main())
