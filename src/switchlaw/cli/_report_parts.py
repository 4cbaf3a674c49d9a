"""The verdict block and the optional stages' sections of the report (Jinja2, autoescaped).

The templates live in ``templates/``: ``verdict.html.j2`` (the answer, first on the page),
``sections.html.j2`` (one section per optional stage) and ``figure.html.j2`` (an embedded
figure with its caption). Every value is escaped by Jinja2; only the templates write markup.
"""

from __future__ import annotations

import base64
from pathlib import Path

from ._stages import BETA_UNIT, DENSITY_UNIT

#: CSS for the parts (added to the report's own style): phone-width and print rules included.
STYLE = """
.verdict { background: #eef6ee; border-left: 4px solid #3c8d40; padding: 0.4em 1em 0.8em; margin: 1em 0; }
.verdict h2 { border: none; margin-top: 0.4em; }
.verdict a.more { font-size: 0.85em; }
figure { margin: 1em 0; }
figcaption { font-size: 0.92em; color: #3a4652; margin-top: 0.3em; }
.scroll { overflow-x: auto; }
@media (max-width: 600px) { body { margin: 0.5em auto; font-size: 15px; } table { font-size: 0.8em; } }
@media print { body { max-width: none; margin: 0; } details { display: block; } a { color: inherit; }
  figure, table, .verdict { break-inside: avoid; } pre { white-space: pre-wrap; } }
"""


def _environment():
    import jinja2

    return jinja2.Environment(
        loader=jinja2.PackageLoader("switchlaw.cli", "templates"),
        autoescape=True, undefined=jinja2.StrictUndefined, keep_trailing_newline=True,
    )


def _g(value, digits=4):
    if value is None:
        return "–"
    if isinstance(value, str):
        return value
    return f"{value:.{digits}g}"


def _figure(figures: dict, name: str, alt: str) -> dict:
    path, caption = figures[name]
    return {"data": base64.b64encode(Path(path).read_bytes()).decode("ascii"), "alt": alt, "caption": caption}


def key_numbers(verdict: dict) -> list[dict]:
    """The verdict's numbers as rows (name, value, unit, section)."""
    rows = []
    if "fitted_beta" in verdict:
        f = verdict["fitted_beta"]
        low, high = f["interval_95"]
        rows.append({"name": "fitted β (95% profile interval)",
                     "value": f"{_g(f['value'])} [{_g(low)}, {_g(high)}]", "unit": BETA_UNIT,
                     "section": "calibration"})
    if "beta" in verdict:
        rows.append({"name": "study's β", "value": _g(verdict["beta"]["value"]), "unit": BETA_UNIT,
                     "section": "population"})
        rows.append({"name": "regime", "value": verdict["regime"], "unit": "–", "section": "population"})
        rows.append({"name": "Allee threshold", "value": _g(verdict["allee_threshold"]["value"]),
                     "unit": DENSITY_UNIT, "section": "population"})
        for c in verdict.get("nearest_critical_betas", []):
            rows.append({"name": f"nearest {c['kind']} β", "value": _g(c["beta"]), "unit": BETA_UNIT,
                         "section": "population"})
    if "extinction" in verdict:
        e = verdict["extinction"]
        rows.append({"name": f"extinction risk from {e['founders']} founder(s)", "value": _g(e["risk"]),
                     "unit": "probability", "section": "extinction"})
        rows.append({"name": "founders for a risk of one half", "value": _g(e["half_at_founders"]),
                     "unit": "cells", "section": "extinction"})
    if "front" in verdict:
        f = verdict["front"]
        rows.append({"name": f"front speed at β = {_g(f['beta'])} ({f['kind']})", "value": _g(f["speed"]),
                     "unit": f["unit"], "section": "front"})
    if "lattice_final_density" in verdict:
        rows.append({"name": "lattice final density", "value": _g(verdict["lattice_final_density"]["value"]),
                     "unit": DENSITY_UNIT, "section": "lattice"})
    if "long_run_growth" in verdict:
        g = verdict["long_run_growth"]
        rows.append({"name": "long-run growth at the study's β", "value": _g(g["value"]),
                     "unit": "nats per generation", "section": "fluctuating"})
        rows.append({"name": "best β net of sensing cost", "value": _g(g["best_beta"]), "unit": BETA_UNIT,
                     "section": "fluctuating"})
    for r in verdict.get("regrowth", []):
        rows.append({"name": f"time to regrowth ({r['plan']})", "value": _g(r["time"]), "unit": r["unit"],
                     "section": "schedule"})
    if "most_influential" in verdict:
        m = verdict["most_influential"]
        rows.append({"name": f"most influential on {m['output'].replace('_', ' ')}", "value": m["parameter"],
                     "unit": f"total-order index {_g(m['total_order_index'], 2)}", "section": "sensitivity"})
    return rows


def verdict_html(data: dict) -> str:
    """The verdict block (HTML, escaped)."""
    return _environment().get_template("verdict.html.j2").render(
        verdict=data["verdict"], key_numbers=key_numbers(data["verdict"]))


def _variant_row(name: str, summary: dict) -> list:
    v = summary["verdict"]
    nearest = "; ".join(f"{_g(c['beta'])} ({c['kind']})" for c in v.get("nearest_critical_betas", [])) or "–"
    ext = v.get("extinction")
    growth = v.get("long_run_growth")
    regrowth = "; ".join(f"{r['plan']}: {_g(r['time'])}" for r in v.get("regrowth", [])) or "–"
    return [name, _g(v.get("beta", {}).get("value")), v.get("regime", "–"),
            _g(v.get("allee_threshold", {}).get("value")), nearest,
            "–" if ext is None else f"{_g(ext['risk'])} ({ext['founders']} founders)",
            "–" if growth is None else _g(growth["value"]), regrowth]


VARIANT_HEADER = ["variant", f"β ({BETA_UNIT})", "regime", f"Allee threshold ({DENSITY_UNIT})",
                  f"nearest critical β ({BETA_UNIT})", "extinction risk (probability)",
                  "long-run growth (nats per generation)", "time to regrowth (time units)"]


def sections_html(results, data: dict, figures: dict) -> str:
    """The optional stages' sections (HTML, escaped); ``figures`` maps name -> (png path, caption)."""
    sections = []
    if "calibration" in data:
        cal = data["calibration"]
        rows = [[name, _g(value), _g(cal["intervals_95"][name][0]), _g(cal["intervals_95"][name][1]),
                 cal["units"][name], "yes" if cal["identifiable"][name] else "NO (flat profile)"]
                for name, value in cal["estimates"].items()]
        tables = [{"caption": "Estimates with 95% profile-likelihood intervals (– where the profile does "
                              "not cross the cut-off inside the bounds)",
                   "header": ["parameter", "estimate", "low", "high", "unit", "identifiable"], "rows": rows},
                  {"caption": "Fit", "header": ["quantity", "value", "unit"], "rows": [
                      ["cells", cal["cells"], "cells"], ["log-likelihood", _g(cal["log_likelihood"], 6), "nats"],
                      ["AIC", _g(cal["aic"], 6), "nats"],
                      ["deviance against the saturated model", _g(cal["deviance"]), f"on {cal['deviance_df']} df"],
                      ["p-value of the deviance", _g(cal["deviance_p_value"], 3), "probability"]]}]
        paragraphs = [f"The study's payoff and beta were fitted to {cal['data']} ({cal['objective']} law, "
                      f"maximum likelihood; status {cal['status']}: {cal['message']}). Every later stage runs "
                      "at the estimates.", cal["verdict"]]
        pop = cal["population"]
        if pop is not None:
            paragraphs.append(pop["sentence"])
            tables.append({"caption": f"Regime across the fitted interval (β in {BETA_UNIT})",
                           "header": ["β", "regime"],
                           "rows": [[_g(b), r] for b, r in zip(pop["betas"], pop["regimes"])]})
        sections.append({
            "id": "calibration", "title": "Fit to the data",
            "paragraphs": paragraphs,
            "figures": [_figure(figures, name, name.replace("_", " ")) for name in
                        ("calibration_fit", "calibration_profiles") if name in figures],
            "tables": tables, "caution": None,
        })
    if "extinction" in data:
        ext = data["extinction"]
        header = ["founders"]
        columns = []
        for c in ext["curves"]:
            header.append(f"exact, β = {_g(c['beta'])}")
            columns.append([_g(p) for p in c["exact"]["probability"]])
            if "simulated" in c:
                s = c["simulated"]
                header.append(f"simulated, β = {_g(c['beta'])} (95 % interval)")
                columns.append([f"{_g(p, 3)} [{_g(lo, 3)}, {_g(hi, 3)}]"
                                for p, (lo, hi) in zip(s["probability"], s["interval_95"])])
        rows = [[n] + [col[i] for col in columns] for i, n in enumerate(ext["founders"])]
        half = [f"β = {_g(c['beta'])}: {_g(c['exact']['half_at_founders'])} cells" for c in ext["curves"]]
        sections.append({
            "id": "extinction", "title": "Extinction risk of a founding population",
            "paragraphs": [
                f"Carrying capacity {ext['sites']} cells (density = cells / {ext['sites']}); a population "
                f"counts as established at {ext['established']} cells. Exact values come from first-step "
                "analysis of the mean-field birth–death chain with the law's fractions (fast switching); "
                "simulated values from exact stochastic simulation with cells re-deciding at rate 1/τ.",
                "Founders needed for a risk of one half (exact): " + "; ".join(half) + ".",
            ],
            "figures": [_figure(figures, "extinction", "extinction risk against founder size")],
            "tables": [{"caption": "Probability of dying out before establishing", "header": header, "rows": rows}],
            "caution": None,
        })
    if "lattice" in data:
        lat = data["lattice"]
        sections.append({
            "id": "lattice", "title": "Lattice agents",
            "paragraphs": [
                f"{lat['sites']} sites, law "
                + (f"at β = {_g(lat['beta'])} {BETA_UNIT}" if lat["beta"] is not None
                   else "by the study's information budget") + ". Final density "
                f"{_g(lat['final_density'])} (standard error {_g(lat['final_density_standard_error'], 2)}) "
                f"against {_g(lat['mean_field_final_density'])} in mean field; the largest gap, "
                f"{_g(lat['largest_discrepancy'], 3)} ({DENSITY_UNIT}) at time {_g(lat['largest_discrepancy_at'], 3)}, is "
                + ("beyond" if lat["discrepancy_significant"] else "within") + " three standard errors.",
            ],
            "figures": [_figure(figures, "lattice_snapshots", "lattice snapshots"),
                        _figure(figures, "lattice_density", "lattice density against mean field")],
            "tables": [{"caption": "Clustering of occupied sites (1: random placement)",
                        "header": ["time (time units)", "P(neighbour occupied | occupied) / density"],
                        "rows": [[_g(c["time"]), _g(c["neighbour_pair_correlation"])] for c in lat["clustering"]]}],
            "caution": None,
        })
    if "front" in data:
        fr = data["front"]
        names = list(results.law.phenotypes)

        def shares(table):
            return ", ".join(f"{n} {_g(table.get(n), 3)}" for n in names)

        rows = [[_g(r["beta"]), r["kind"], _g(r["speed"]), _g(r["linear_speed"]), _g(r["decay_rate"]),
                 _g(r["width"]), shares(r["edge_fractions"]), shares(r["bulk_fractions"]),
                 f"{r['status']}: {r['message']}", r["note"] or "–"] for r in fr["runs"]]
        tables = [{"caption": "Front runs", "header": [
            f"β ({BETA_UNIT})", "kind", "speed (length per time unit)", "c* (length per time unit)",
            "λ* (per length unit)", "width (length units)", "edge fractions", "bulk fractions",
            "status", "note"], "rows": rows}]
        if "scan" in fr:
            sc = fr["scan"]
            tables.append({"caption": "Speed against β", "header": [
                f"β ({BETA_UNIT})", "speed (length per time unit)", "c* (length per time unit)", "kind", "status"],
                "rows": [[_g(b), _g(v), _g(c), k, st] for b, v, c, k, st in
                         zip(sc["beta"], sc["speed"], sc["linear_speed"], sc["kind"], sc["status"])]})
        front = results.study.front
        sections.append({
            "id": "front", "title": "Travelling fronts",
            "paragraphs": [f"The mean-field model with each phenotype diffusing ({', '.join(f'{n}: {_g(front.diffusion[n])}' for n in names)} "
                           f"length² per time unit) on a domain of {_g(front.length)} length units (grid {_g(front.dx)}, "
                           f"dimension {front.dimension}) up to t = {_g(front.t_end)}. c* is the linear spreading speed "
                           "and λ* its decay rate; a pulled front moves at c*, a pushed one faster."],
            "figures": [_figure(figures, name, name.replace("_", " ")) for name in
                        ("front_profiles", "front_position", "front_speeds") if name in figures],
            "tables": tables, "caution": None,
        })
    if "fluctuating" in data:
        flu = data["fluctuating"]
        at = flu["at_study_beta"]
        rows = [["cue information I(E; C)", _g(flu["cue_information_bits"]), "bits"],
                ["best bet hedging without a cue", _g(flu["bet_hedging_growth"]), "nats per generation"],
                ["best strategy with the cue", _g(flu["optimal_growth_with_cue"]), "nats per generation"],
                ["best β net of the sensing cost", _g(flu["best_beta"]), BETA_UNIT],
                ["net growth at the best β", _g(flu["best_net_growth"]), "nats per generation"],
                ["information used at the best β", _g(flu["best_information_bits"]), "bits"]]
        if at is not None:
            rows[1:1] = [["law's growth at the study's β", _g(at["growth_rate"]), "nats per generation"],
                         ["law's net growth at the study's β", _g(at["net_growth"]), "nats per generation"]]
        sections.append({
            "id": "fluctuating", "title": "Growth in a fluctuating environment",
            "paragraphs": [
                "The law here decides on a cue about the environment state, with the expected offspring given "
                "the cue as its payoff; its long-run growth is the average log of the population's growth "
                f"factor over the states' long-run fractions ({', '.join(_g(p, 3) for p in flu['state_fractions'])}). "
                f"The sensing cost is {_g(flu['cost_per_bit'])} nats per generation per bit.",
            ],
            "figures": [_figure(figures, "fluctuating", "long-run growth against beta")],
            "tables": [{"caption": "", "header": ["quantity", "value", "unit"], "rows": rows}],
            "caution": None,
        })
    if "schedule" in data:
        sch = data["schedule"]
        rows = [[p["name"], _g(p["on"]), _g(p["off"]), p["cycles"], _g(p["total_stress"]),
                 ", ".join(_g(g, 3) for g in p["growth_per_cycle"]),
                 ", ".join(_g(f, 3) for f in p["tolerant_fraction_after_stress"]),
                 _g(p["regrowth_time"]), _g(p["final_density"])] for p in sch["plans"]]
        treatment = bool(results.study.schedule.treatment)
        from ._caution import CAUTION

        sections.append({
            "id": "schedule", "title": "Scheduled stress",
            "paragraphs": [
                f"Mean-field model at β = {_g(sch['beta'])} {BETA_UNIT}, starting at density "
                f"{_g(sch['initial_density'])}; while the stress is on, the rates and payoffs of the "
                "[schedule.stress] table replace the study's. Time to regrowth runs from the end of the last "
                f"stress period until the density is back at {_g(sch['regrowth_density'])} ({DENSITY_UNIT}).",
            ],
            "figures": [_figure(figures, "schedule", "density and tolerant fraction under the schedules")],
            "tables": [{"caption": "", "header": [
                "plan", "stress on (time units)", "off (time units)", "cycles", "total stress (time units)",
                "growth per cycle (nats)", f"fraction {sch['tolerant']} after each stress",
                "time to regrowth (time units)", f"final density ({DENSITY_UNIT})"], "rows": rows}],
            "caution": CAUTION if treatment else None,
        })
    if "sensitivity" in data:
        sen = data["sensitivity"]
        tables = []
        local = [[f"{'Allee threshold' if e['allee_threshold'] else 'equilibrium'} ρ* = {_g(e['density'])} "
                  f"({'stable' if e['stable'] else 'unstable'})", p, _g(v)]
                 for e in sen["equilibria"] for p, v in e["derivatives"].items()]
        local += [[f"{c['kind']} β_c = {_g(c['beta'])}", p, _g(v)]
                  for c in sen["critical_betas"] for p, v in c["derivatives"].items()]
        if local:
            tables.append({"caption": "Local derivatives (output unit per parameter unit; densities are "
                                      "fractions of sites, betas nats per payoff unit, rates per unit time)",
                           "header": ["output", "parameter", "derivative"], "rows": local})
        sobol = [[s["output"], name, _g(f, 3), _g(t, 3), _g(e, 2)]
                 for s in sen["sobol"] if "parameters" in s
                 for name, f, t, e in zip(s["parameters"], s["first_order"], s["total_order"], s["total_order_error"])]
        sobol += [[s["output"], "–", s["note"], "", ""] for s in sen["sobol"] if "parameters" not in s]
        if sobol:
            tables.append({"caption": "Sobol' indices (dimensionless; a missing threshold counts as 0)",
                           "header": ["output", "parameter", "first order", "total order", "s.e. (total)"],
                           "rows": sobol})
        sections.append({
            "id": "sensitivity", "title": "Sensitivities",
            "paragraphs": [f"Local derivatives at β = {_g(sen['beta'])} {BETA_UNIT} by the implicit function "
                           "theorem; Sobol' indices over the declared ranges (Saltelli design)."],
            "figures": [_figure(figures, name, name.replace("_", " ")) for name in
                        ("sensitivity_sobol", "sensitivity_local") if name in figures],
            "tables": tables, "caution": None,
        })
    if "variants" in data:
        rows = [_variant_row("study", data)] + [_variant_row(v["name"], v) for v in data["variants"]]
        sections.append({
            "id": "variants", "title": "Variants side by side",
            "paragraphs": ["Every stage ran again for each [[variant]] with its keys laid over the study's."],
            "figures": [_figure(figures, "variants", "bifurcation diagrams of the study and its variants")]
            if "variants" in figures else [],
            "tables": [{"caption": "Key numbers per variant", "header": VARIANT_HEADER, "rows": rows}],
            "caution": None,
        })
    return _environment().get_template("sections.html.j2").render(sections=sections)
