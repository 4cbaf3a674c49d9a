"""One self-contained HTML report (figures embedded) a modeller can send to a colleague."""

from __future__ import annotations

import base64
import html
from pathlib import Path

from ._pipeline import CAUTION

_STYLE = """
body { font-family: system-ui, sans-serif; max-width: 980px; margin: 2em auto; padding: 0 1em;
       color: #1d2733; line-height: 1.45; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { border-bottom: 1px solid #d5dbe1; padding-bottom: 0.2em; margin-top: 1.8em; }
.caution { background: #fff4e0; border-left: 4px solid #d98c1a; padding: 0.6em 1em; }
img { max-width: 100%; border: 1px solid #e3e7eb; }
table { border-collapse: collapse; margin: 0.6em 0; font-size: 0.92em; }
th, td { border: 1px solid #d5dbe1; padding: 0.25em 0.6em; text-align: right; }
th { background: #f1f4f7; }
pre { background: #f6f8fa; padding: 0.8em; overflow-x: auto; font-size: 0.88em; }
details { margin: 0.5em 0 1em; }
.muted { color: #5d6b78; font-size: 0.92em; }
"""


def _image(path: Path, alt: str, caption: str = "") -> str:
    data = base64.b64encode(path.read_bytes()).decode("ascii")
    return (f'<figure><img alt="{html.escape(alt)}" src="data:image/png;base64,{data}">'
            f'<figcaption>{html.escape(caption or alt)}</figcaption></figure>')


def _table(header, rows) -> str:
    head = "".join(f"<th>{html.escape(str(h))}</th>" for h in header)
    body = "".join(
        "<tr>" + "".join(f"<td>{html.escape(str(c))}</td>" for c in row) + "</tr>" for row in rows
    )
    return f"<table><tr>{head}</tr>{body}</table>"


def _fmt(value, digits: int = 6) -> str:
    if value is None:
        return "–"
    if isinstance(value, str):
        return value
    return f"{value:.{digits}g}"


def render(results, data: dict, figures: dict, extra: dict | None = None) -> str:
    """The report as one HTML string: the verdict first, then the figures, the study file last.

    ``extra`` maps the optional stages' figure names to ``(png path, caption)``.
    """
    from ._report_parts import STYLE, sections_html, verdict_html

    law = results.law
    title = html.escape(results.study.study.title)
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        "<meta name='viewport' content='width=device-width, initial-scale=1'>",
        f"<title>{title} — switchlaw report</title><style>{_STYLE}{STYLE}</style></head><body>",
        f"<h1>{title}</h1>",
        f"<p class='muted'>switchlaw {html.escape(data['switchlaw_version'])} · seed "
        f"{results.study.study.seed}</p>",
        f"<p class='caution'><strong>Research use only.</strong> {html.escape(CAUTION)}</p>",
    ]
    if results.study.study.notes:
        parts.append(f"<p>{html.escape(results.study.study.notes)}</p>")
    parts.append(verdict_html(data))

    route = {"beta": "β", "cost_per_bit": "sensing cost (payoff units per bit)",
             "bits": "information budget (bits)"}[law.route]
    parts.append("<h2 id='law'>The switching law</h2>")
    parts.append(
        f"<p>Objective <code>{law.objective}</code>, derived from {route} = {law.setting:g} over "
        f"{law.densities.size} densities in [{law.densities[0]:g}, {law.densities[-1]:g}]"
        + (f" (β = {law.betas[0]:.6g} nats per payoff unit)" if law.route == "cost_per_bit" else "")
        + ". Left: the probability of the named phenotype for each sensed signal value and density. "
        "Right: mean-field phenotype fractions, averaged over the distribution of sensed states at "
        "each density.</p>"
    )
    if law.route == "bits":
        parts.append(
            f"<p>With a budget each density has its own β: from {min(law.betas):.4g} to "
            f"{max(law.betas):.4g} nats per payoff unit (∞ where the budget does not bind).</p>"
        )
    for key in sorted(k for k in figures if k == "law" or k.startswith("law_")):
        parts.append(_image(figures[key], f"switching law heat map and fractions ({key})",
                            "Left: probability of the phenotype for each sensed value and density; look for "
                            "where it switches. Right: mean-field phenotype fractions against density."))
    step = max(1, law.densities.size // 20)
    fractions = law.fractions(law.densities[::step])
    rows = [
        [_fmt(rho, 4)] + [_fmt(f, 4) for f in frac] + [_fmt(i, 4), _fmt(e, 5)]
        for rho, frac, i, e in zip(law.densities[::step], fractions, law.information_bits[::step],
                                   law.expected_payoff[::step])
    ]
    parts.append("<details><summary>Numbers behind the figure</summary>")
    parts.append(_table(["density"] + [f"fraction {p}" for p in law.phenotypes] + ["I (bits)", "E[u]"], rows))
    parts.append("</details>")

    curve = results.curve
    parts.append("<h2>Information–payoff curve</h2>")
    parts.append(
        f"<p>At density {results.reference_density:g}: the payoff a cell can earn for each amount of "
        "information it uses about its surroundings, along β.</p>"
    )
    parts.append(_image(figures["tradeoff"], "information–payoff curve",
                        "Expected payoff (payoff units) against the information used (bits) along β; kinks "
                        "mark the critical betas where phenotypes enter or leave the law."))
    parts.append("<details><summary>Numbers behind the figure</summary>")
    parts.append(_table(
        ["β", "I (bits)", "E[u]"],
        [[_fmt(b, 5), _fmt(i, 5), _fmt(e, 6)] for b, i, e in
         zip(curve.betas, curve.information_bits, curve.expected_payoff)],
    ))
    parts.append("</details>")
    if curve.critical_betas:
        def change(c):
            moves = [f"{law.phenotypes[x]} enters" for x in c.entering]
            moves += [f"{law.phenotypes[x]} leaves" for x in c.leaving]
            return f"β = {c.beta:.6g} ({', '.join(moves)})"

        parts.append("<p>The set of phenotypes in use changes at " + "; ".join(
            change(c) for c in curve.critical_betas) + ".</p>")

    if results.diagram is not None:
        parts.append("<h2 id='population'>Population: equilibria and bifurcations in β</h2>")
        parts.append(
            "<p>Stable equilibria solid, unstable dashed. Regimes: <em>extinction</em> — no positive "
            "state is stable; <em>monostable</em> — any small population grows to one stable density; "
            "<em>weak Allee</em> — it grows, but its per-capita growth first rises with density; "
            "<em>strong Allee</em> — bistable: a colony below the threshold density dies out in the "
            "mean-field model.</p>"
        )
        at = data.get("at_study_beta")
        if at is not None:
            threshold = "" if at["allee_threshold"] is None else f", Allee threshold density {at['allee_threshold']:.4g}"
            parts.append(
                f"<p><strong>At the study's β = {at['beta']:.6g}</strong> (dotted line) the population is "
                f"in the <em>{html.escape(at['regime'])}</em> regime{threshold}.</p>"
            )
        parts.append(_image(figures["bifurcation"], "bifurcation diagram in beta",
                            "Equilibrium density (fraction of sites) against β (nats per payoff unit); look "
                            "for the folds and transcritical points where the regime changes, and where the "
                            "study's β (dotted) sits between them."))
        crit = results.diagram.critical_points
        parts.append("<h3>Critical β values</h3>")
        parts.append(_table(["β", "kind", "density"], [[_fmt(c.beta, 10), c.kind, _fmt(c.density, 6)] for c in crit])
                     if crit else "<p>None in the scanned range.</p>")
        if not results.diagram.complete:
            parts.append("<p class='caution'>Continuation did not complete on every branch: "
                         + html.escape("; ".join(b.ended for b in results.diagram.branches if b.failed)) + "</p>")
        parts.append("<details><summary>Regime at each β</summary>")
        parts.append(_table(
            ["β", "regime", "growth when rare", "Allee threshold", "largest stable density", "positive equilibria"],
            [[_fmt(r["beta"], 5), r["regime"], _fmt(r["low_density_growth"], 4), _fmt(r["allee_threshold"], 4),
              _fmt(r["largest_stable_density"], 4), r["positive_equilibria"]]
             for r in data["population"]["regimes"]],
        ))
        parts.append("</details>")
    if results.regime_map is not None:
        rm = results.regime_map
        parts.append(f"<h2 id='regime_map'>Regime map: β × {html.escape(rm.parameter)}</h2>")
        what = {"death_scale": "every phenotype's death rate", "division_scale": "every phenotype's division rate"}
        parts.append(
            f"<p>The vertical axis multiplies {what.get(rm.parameter, rm.parameter)} of the study by the "
            "value shown (1 is the study as given). Colours are the regimes defined above; squares and "
            "dots mark transcritical points and folds found by continuation in β.</p>"
        )
        parts.append(_image(figures["regime_map"], "regime map",
                            "Regimes over β and the scale factor; black curves are the critical betas "
                            "computed by continuation, the boundaries between the colour cells. Look for "
                            "where the study's row (scale 1) crosses them."))
        parts.append("<details><summary>Numbers behind the figure</summary>")
        parts.append(_table([rm.parameter, "critical β (kind)"], [
            [_fmt(v, 4), "; ".join(f"{c.beta:.5g} ({c.kind})" for c in row) or "–"]
            for v, row in zip(rm.values, rm.critical)
        ]))
        parts.append("</details>")
    parts.append(sections_html(results, data, extra or {}))
    parts.append("<h2 id='study'>The study as given</h2>")
    parts.append(f"<pre>{html.escape(results.text)}</pre>")
    parts.append(f"<p class='caution'><strong>Research use only.</strong> {html.escape(CAUTION)}</p>")
    parts.append("</body></html>")
    return "\n".join(parts)
