"""The command line, study files, the demos and the report."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

from switchlaw.cli._expressions import ExpressionError, evaluate, parse
from switchlaw.cli._main import main
from switchlaw.cli._study import StudyError, json_schema, load_text

ROOT = Path(__file__).resolve().parents[1]
STUDIES = ROOT / "src" / "switchlaw" / "cli" / "studies"
GOOD = (STUDIES / "colony.toml").read_text(encoding="utf-8")


def errors_of(text):
    with pytest.raises(StudyError) as info:
        load_text(text, "study.toml")
    return info.value.lines


def test_builtin_studies_validate():
    for path in STUDIES.glob("*.toml"):
        study = load_text(path.read_text(encoding="utf-8"), str(path))
        assert "invented" in study.study.title.lower() or "invented" in study.study.notes.lower()


def test_every_problem_is_one_line_with_key_path_and_value():
    text = GOOD.replace('neighbours = 6', 'neighbours = "six"').replace("seed = 1", "seed = 1\ncolour = \"red\"")
    lines = errors_of(text)
    assert any(line.startswith("study.toml: senses.neighbours: ") and "(got 'six')" in line for line in lines)
    assert any(line.startswith("study.toml: study.colour: Extra inputs are not permitted") for line in lines)
    assert all("\n" not in line for line in lines)


@pytest.mark.parametrize(
    "old, new, expected",
    [
        ('beta = 12.0', 'beta = 12.0\nbits = 0.3', "study.toml: decision: give exactly one of beta, cost_per_bit, bits"),
        ('roam = "1 - y / 6"', 'roam = "1 - z / 6"', "study.toml: payoff.roam: unknown name 'z'"),
        ('roam = "1 - y / 6"', 'roam = "1 - y / 6"\nrest = "0.5"', "study.toml: payoff.rest: unknown phenotype"),
        ('death = { divide = 0.27, roam = 0.27 }', 'death = { divide = 0.27, roam = -0.1 }', "study.toml: population.death.roam: rates must be finite and >= 0 (got -0.1)"),
        ('formats = ["csv", "netcdf", "sbml"]', 'formats = ["csv", "xlsx"]', "study.toml: exports.formats[1]: unknown format"),
        ('densities = { start = 0.0, stop = 1.0, points = 101 }', 'densities = { start = 0.0, stop = 1.5, points = 101 }', "study.toml: decision.densities: densities must satisfy 0 <= start < stop <= 1"),
        ('beta = 12.0', 'beta = -4.0', "study.toml: decision.beta: Input should be greater than or equal to 0 (got -4.0)"),
    ],
)
def test_study_errors(old, new, expected):
    assert old in GOOD
    lines = errors_of(GOOD.replace(old, new))
    assert any(line.startswith(expected) for line in lines), lines


def test_not_toml_at_all():
    assert errors_of("[study\ntitle = 1")[0].startswith("study.toml: (file): not valid TOML")


@pytest.mark.parametrize(
    "text",
    ["__import__('os').system('echo hi')", "y.__class__", "(lambda: 1)()", "[y for y in ()]",
     "open('x')", "y if y else 0", "'text'", "exp(y, base=2)"],
)
def test_expressions_cannot_run_code(text):
    with pytest.raises(ExpressionError):
        parse(text, ("y", "density"))


def test_expressions_compute_arithmetic():
    import numpy as np

    tree = parse("1 - 2 * y ** 2 / (1 + exp(-density)) + max(y, 0.5)", ("y", "density"))
    y = np.array([0.0, 1.0])
    expected = 1 - 2 * y**2 / (1 + np.exp(-0.3)) + np.maximum(y, 0.5)
    np.testing.assert_allclose(evaluate(tree, {"y": y, "density": 0.3}), expected, rtol=1e-15)


def test_published_schema_is_current():
    published = json.loads((ROOT / "docs" / "study.schema.json").read_text(encoding="utf-8"))
    assert published == json_schema()


def test_check_command(tmp_path, capsys):
    assert main(["check", str(STUDIES / "colony.toml")]) == 0
    bad = tmp_path / "bad.toml"
    bad.write_text(GOOD.replace("neighbours = 6", "neighbours = 0"), encoding="utf-8")
    assert main(["check", str(bad)]) == 2
    err = capsys.readouterr().err
    assert f"{bad}: senses.neighbours: Input should be greater than or equal to 1 (got 0)" in err
    assert main(["check", str(tmp_path / "missing.toml")]) == 2


def test_demo_writes_everything_and_refuses_to_overwrite(tmp_path, capsys):
    out = tmp_path / "run"
    assert main(["demo", "colony", "--out", str(out), "--quiet"]) == 0
    names = {p.name for p in out.iterdir()}
    assert {"summary.json", "report.html", "figures", "law.csv", "law.nc", "scan.nc", "study.toml"} <= names
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    kinds = [c["kind"] for c in summary["population"]["critical_betas"]]
    assert "transcritical" in kinds and "fold" in kinds
    regimes = {r["regime"] for r in summary["population"]["regimes"]}
    assert {"strong-allee", "extinction"} <= regimes  # a regime change in beta
    report = (out / "report.html").read_text(encoding="utf-8")
    assert "not a medical device" in report and report.count("data:image/png;base64,") >= 4
    assert (out / "figures" / "bifurcation.svg").exists()
    assert main(["demo", "colony", "--out", str(out), "--quiet"]) == 2
    assert "already exists (use --force" in capsys.readouterr().err
    assert main(["demo", "colony", "--out", str(out), "--quiet", "--force"]) == 0


def test_dormancy_demo_changes_regime(tmp_path):
    out = tmp_path / "dormancy"
    assert main(["demo", "dormancy", "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    regimes = [r["regime"] for r in summary["population"]["regimes"]]
    assert regimes[0] == "extinction" and regimes[-1] == "monostable"


def test_pulsed_demo_compares_schedules_with_the_caution(tmp_path):
    out = tmp_path / "pulsed"
    assert main(["demo", "pulsed", "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    plans = summary["schedule"]["plans"]
    assert [p["total_stress"] for p in plans] == [6.0, 6.0, 6.0]  # same total stress, different pulses
    assert len({p["final_density"] for p in plans}) == 3
    assert all(len(p["tolerant_fraction_after_stress"]) == p["cycles"] for p in plans)
    assert summary["variants"][0]["name"] == "noisier receptor"
    assert summary["fluctuating"]["best_net_growth"] <= summary["fluctuating"]["optimal_growth_with_cue"]
    report = (out / "report.html").read_text(encoding="utf-8")
    schedule = report[report.index('<section id="schedule">'):]
    schedule = schedule[:schedule.index("</section>")]
    assert "Research use only" in schedule and "not a medical device" in schedule.lower()


def test_a_failing_run_leaves_nothing_behind(tmp_path, capsys):
    study = tmp_path / "nan.toml"
    study.write_text(GOOD.replace('roam = "1 - y / 6"', 'roam = "log(y - 10)"'), encoding="utf-8")
    out = tmp_path / "out"
    assert main(["run", str(study), "--out", str(out), "--quiet"]) == 2
    assert not out.exists()
    assert not any(p.name.startswith(".out.") for p in tmp_path.iterdir())
    assert "payoff" in capsys.readouterr().err


def test_unknown_demo_and_no_command(capsys):
    assert main(["demo", "nowhere", "--out", "x"]) == 2
    assert "unknown demo 'nowhere' (valid: colony, dormancy, pulsed, calibrated)" in capsys.readouterr().err


def test_help_imports_nothing_heavy():
    # `switchlaw --help` must start in well under a second: the command module may not pull
    # in numpy, scipy, jax, matplotlib or cvxpy at import time.
    code = (
        "import sys, switchlaw.cli._main as m; "
        "heavy = [n for n in ('numpy', 'scipy', 'jax', 'matplotlib', 'cvxpy', 'xarray') if n in sys.modules]; "
        "print(heavy)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, encoding="utf-8", check=True)
    assert out.stdout.strip() == "[]"
    helped = subprocess.run([sys.executable, "-m", "switchlaw.cli._main", "--help"], capture_output=True, text=True, encoding="utf-8")
    assert helped.returncode == 0 and "not a medical device" in helped.stdout


@pytest.mark.slow
def test_report_renders_in_a_real_browser(tmp_path):
    # Needs Debian's chromium (apt-get install chromium); run with `python -m pytest -m slow`.
    import shutil

    browser = shutil.which("chromium")
    assert browser, "install chromium to run the browser check"
    out = tmp_path / "run"
    assert main(["demo", "colony", "--out", str(out), "--quiet"]) == 0
    shot = tmp_path / "report.png"
    subprocess.run(
        [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         f"--user-data-dir={tmp_path / 'profile'}", "--window-size=1100,3000",
         f"--screenshot={shot}", (out / "report.html").as_uri()],
        capture_output=True, timeout=120, check=True,
    )
    from matplotlib.image import imread

    pixels = imread(shot)
    assert pixels.shape[0] == 3000 and pixels.shape[1] == 1100
    # A rendered page with text and figures is far from blank: many distinct grey levels.
    assert len({round(float(v), 2) for v in pixels[:, :, :3].mean(axis=2).ravel()[::97]}) > 20
