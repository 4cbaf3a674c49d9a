"""One self-contained HTML report (figures embedded) a modeller can send to a colleague.

The page comes from the Jinja2 template ``templates/report.html.j2`` with autoescaping on:
every value is escaped unless the template itself writes the markup, so text from a study
file (title, notes, phenotype names) shows as text and can never run script in a browser.
This module only turns results into plain values; it imports nothing from the pipeline.
"""

from __future__ import annotations

import base64
from pathlib import Path

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


def _template():
    import jinja2

    environment = jinja2.Environment(
        loader=jinja2.PackageLoader("switchlaw.cli", "templates"),
        autoescape=True,  # every template here is HTML
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
    )
    return environment.get_template("report.html.j2")


def _image(path: Path) -> str:
    return base64.b64encode(Path(path).read_bytes()).decode("ascii")


def _fmt(value, digits: int = 6) -> str:
    if value is None:
        return "–"
    if isinstance(value, str):
        return value
    return f"{value:.{digits}g}"


def _law(results, figures: list) -> dict:
    law = results.law
    route = {"beta": "β", "cost_per_bit": "sensing cost (payoff units per bit)",
             "bits": "information budget (bits)"}[law.route]
    step = max(1, law.densities.size // 20)
    fractions = law.fractions(law.densities[::step])
    rows = [
        [_fmt(rho, 4)] + [_fmt(f, 4) for f in frac] + [_fmt(i, 4), _fmt(e, 5)]
        for rho, frac, i, e in zip(law.densities[::step], fractions, law.information_bits[::step],
                                   law.expected_payoff[::step])
    ]
    shown = [f for f in figures if f.kind == "law"]
    return {
        "objective": law.objective, "route": route, "setting": f"{law.setting:g}",
        "points": law.densities.size, "first": f"{law.densities[0]:g}", "last": f"{law.densities[-1]:g}",
        "beta_from_cost": f"{law.betas[0]:.6g}" if law.route == "cost_per_bit" else None,
        "beta_range": (f"{min(law.betas):.4g}", f"{max(law.betas):.4g}") if law.route == "bits" else None,
        "figures": [{"data": _image(f.path), "alt": f"switching law heat map and fractions ({f.label})"}
                    for f in shown],
        "header": ["density"] + [f"fraction {p}" for p in law.phenotypes] + ["I (bits)", "E[u]"],
        "rows": rows,
    }


def _curve(results, figures: list) -> dict:
    law, curve = results.law, results.curve

    def change(c):
        moves = [f"{law.phenotypes[x]} enters" for x in c.entering]
        moves += [f"{law.phenotypes[x]} leaves" for x in c.leaving]
        return f"β = {c.beta:.6g} ({', '.join(moves)})"

    return {
        "density": f"{results.reference_density:g}",
        "figure": _image(_find(figures, "tradeoff").path),
        "rows": [[_fmt(b, 5), _fmt(i, 5), _fmt(e, 6)] for b, i, e in
                 zip(curve.betas, curve.information_bits, curve.expected_payoff)],
        "changes": [change(c) for c in curve.critical_betas],
    }


def _population(results, data: dict, figures: list) -> dict | None:
    if results.diagram is None:
        return None
    at = data.get("at_study_beta")
    crit = results.diagram.critical_points
    return {
        "at": None if at is None else {
            "beta": f"{at['beta']:.6g}", "regime": at["regime"],
            "threshold": None if at["allee_threshold"] is None else f"{at['allee_threshold']:.4g}",
        },
        "figure": _image(_find(figures, "bifurcation").path),
        "critical": [[_fmt(c.beta, 10), c.kind, _fmt(c.density, 6)] for c in crit],
        "incomplete": None if results.diagram.complete else
        "; ".join(b.ended for b in results.diagram.branches if b.failed),
        "regimes": [[_fmt(r["beta"], 5), r["regime"], _fmt(r["low_density_growth"], 4), _fmt(r["allee_threshold"], 4),
                     _fmt(r["largest_stable_density"], 4), r["positive_equilibria"]]
                    for r in data["population"]["regimes"]],
    }


def _regime_map(results, figures: list) -> dict | None:
    rm = results.regime_map
    if rm is None:
        return None
    what = {"death_scale": "every phenotype's death rate", "division_scale": "every phenotype's division rate"}
    return {
        "parameter": rm.parameter, "what": what.get(rm.parameter, rm.parameter),
        "figure": _image(_find(figures, "regime_map").path),
        "rows": [[_fmt(v, 4), "; ".join(f"{c.beta:.5g} ({c.kind})" for c in row) or "–"]
                 for v, row in zip(rm.values, rm.critical)],
    }


def _find(figures: list, kind: str):
    return next(f for f in figures if f.kind == kind)


def render(results, data: dict, figures, extra: dict | None = None) -> str:
    """The report as one HTML string: the verdict first, then the figures, the study file last.

    ``data`` is the summary (``summary.json``); ``figures`` lists the figures written, each
    with ``kind`` (``law``, ``tradeoff``, ``bifurcation``, ``regime_map``), ``label`` (for a
    law map, the phenotype) and ``path`` (its PNG); ``extra`` maps the optional stages' figure
    names to ``(png path, caption)`` (see ``_report_parts``).
    """
    from markupsafe import Markup

    from ._report_parts import STYLE, sections_html, verdict_html

    figures = list(figures)
    meta = results.study.study
    return _template().render(
        style=_STYLE + STYLE, title=meta.title, notes=meta.notes, seed=meta.seed,
        version=data["switchlaw_version"], caution=data["caution"], study_text=results.text,
        law=_law(results, figures), curve=_curve(results, figures),
        population=_population(results, data, figures), regime_map=_regime_map(results, figures),
        # Both parts come from autoescaped templates of their own: safe to insert as markup.
        verdict=Markup(verdict_html(data)), sections=Markup(sections_html(results, data, extra or {})),
    )
