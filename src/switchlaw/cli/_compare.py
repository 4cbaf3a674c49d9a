"""``switchlaw compare A B --out DIR``: one side-by-side report of two finished runs."""

from __future__ import annotations

import base64
import json
import sys
from pathlib import Path

#: Figures compared, in report order: file stem -> (title, what to look for).
FIGURES = {
    "bifurcation": ("Equilibria against β", "equilibrium density (fraction of sites) against β (nats per payoff "
                    "unit); compare where the folds and transcritical points sit."),
    "regime_map": ("Regime map", "regimes over β and the scale factor with the computed critical-beta curves; "
                   "compare where the boundaries move."),
    "extinction": ("Extinction risk", "probability of dying out against founders; compare where each curve "
                   "crosses one half."),
    "lattice_density": ("Lattice against mean field", "density (fraction of sites) against time; compare the "
                        "gap between the lattice and mean field."),
    "fluctuating": ("Fluctuating environment", "long-run growth (nats per generation) against β; compare the "
                    "best β net of the sensing cost."),
    "schedule": ("Scheduled stress", "density and tolerant fraction under each schedule; compare the falls "
                 "during stress and the regrowth."),
    "sensitivity_sobol": ("Sobol' indices", "total-order indices; compare which parameter ranks first."),
    "tradeoff": ("Information–payoff curve", "expected payoff against bits; compare the kinks."),
}


class CompareError(ValueError):
    pass


def _read(folder: Path) -> dict:
    path = folder / "summary.json"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except OSError:
        raise CompareError(f"{folder}: not a finished switchlaw run (no readable summary.json)") from None
    except json.JSONDecodeError as error:
        raise CompareError(f"{path}: not valid JSON ({error.msg})") from None
    if not isinstance(data, dict) or "verdict" not in data or "study" not in data:
        raise CompareError(f"{path}: has no verdict (written by an older switchlaw? run the study again)")
    return data


def _image(folder: Path, stem: str) -> str | None:
    path = folder / "figures" / f"{stem}.png"
    return base64.b64encode(path.read_bytes()).decode("ascii") if path.is_file() else None


def page(first, second) -> str:
    """The comparison report as one self-contained HTML string."""
    from ._caution import CAUTION
    from ._report_parts import _environment, key_numbers

    folders = [Path(first), Path(second)]
    data = [_read(f) for f in folders]
    runs = []
    for label, folder, d in zip(("A", "B"), folders, data):
        runs.append({"label": f"{label} ({folder.name})", "title": d["study"]["title"],
                     "sentences": [s["text"] for s in d["verdict"]["sentences"]]})
    tables = [key_numbers(d["verdict"]) for d in data]
    names = list(dict.fromkeys(r["name"] for t in tables for r in t))
    rows = []
    for name in names:
        found = [next((r for r in t if r["name"] == name), None) for t in tables]
        unit = next(r["unit"] for r in found if r is not None)
        rows.append({"name": name, "unit": unit,
                     "left": "–" if found[0] is None else found[0]["value"],
                     "right": "–" if found[1] is None else found[1]["value"]})
    figures = []
    for stem, (title, caption) in FIGURES.items():
        sides = [{"data": _image(f, stem), "alt": f"{title} ({run['label']})", "label": run["label"]}
                 for f, run in zip(folders, runs)]
        if any(s["data"] for s in sides):
            figures.append({"title": title, "caption": caption, "sides": sides})
    return _environment().get_template("compare.html.j2").render(
        left=runs[0], right=runs[1], rows=rows, figures=figures, caution=CAUTION)


def compare(first, second, out, *, force: bool = False) -> int:
    """Write ``out/report.html``; exit code 0, or 2 with a one-line error and nothing written."""
    from ._outputs import OutputExists, OutputFolder

    try:
        text = page(first, second)
        with OutputFolder(out, force=force) as folder:
            (folder.work / "report.html").write_text(text, encoding="utf-8")
            folder.commit()
    except (CompareError, OutputExists) as error:
        print(f"switchlaw: error: {error}", file=sys.stderr)
        return 2
    return 0
