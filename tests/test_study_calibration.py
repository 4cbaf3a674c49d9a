"""The [calibration] study section: fit first, then every later stage at the estimates."""

import csv
import io
import json
import shutil
from pathlib import Path

import pytest

import switchlaw as sl
from switchlaw.calibration import invented_colony_data
from switchlaw.cli._main import main

STUDIES = Path(__file__).resolve().parents[1] / "src" / "switchlaw" / "cli" / "studies"
DEMO = (STUDIES / "calibrated.toml").read_text(encoding="utf-8")


def test_shipped_counts_are_the_documented_generator_output():
    # The demo's CSV is exactly what the documented seeded generator writes (seed 1).
    data = invented_colony_data(seed=1)
    text = io.StringIO()
    writer = csv.DictWriter(text, fieldnames=["density", "state", "phenotype", "count"], lineterminator="\n")
    writer.writeheader()
    writer.writerows(data.rows())
    assert (STUDIES / "calibrated-counts.csv").read_text(encoding="utf-8") == text.getvalue()
    assert data.truth == {"beta": 6.0, "half": 2.0, "roam_value": 0.45}


def test_the_demo_fit_recovers_the_known_parameters_and_later_stages_use_it(tmp_path):
    result = sl.demo_study("calibrated").run(out=tmp_path / "out")
    cal = result.summary["calibration"]
    assert cal["status"] == "converged" and cal["converged"]
    # The data were simulated from beta = 6, half = 2, roam_value = 0.45 (invented_colony_data):
    # each 95% profile interval covers its true value (recovery, as issue 18 §4 asks).
    for name, truth in {"beta": 6.0, "half": 2.0, "roam_value": 0.45}.items():
        low, high = cal["intervals_95"][name]
        assert low < truth < high, (name, low, high)
        assert cal["identifiable"][name]
    beta = cal["estimates"]["beta"]
    assert cal["units"]["beta"] == "nats per payoff unit"
    # Every later stage ran at the fitted beta.
    assert result.summary["at_study_beta"]["beta"] == beta
    assert result.summary["stages"][:2] == ["calibration", "law"]
    verdict = result.summary["verdict"]
    assert verdict["fitted_beta"]["value"] == beta
    assert verdict["fitted_beta"]["interval_95"] == cal["intervals_95"]["beta"]
    assert verdict["sentences"][0]["section"] == "calibration"
    pop = cal["population"]
    assert pop["beta_interval"] == cal["intervals_95"]["beta"] and len(pop["regimes"]) == len(pop["betas"])
    html = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert "Fit to the data" in html and "profile" in html
    assert {"figures/calibration_fit.png", "figures/calibration_profiles.png"} <= set(result.written)
    # The fitted payoff is the generator's, so the law at the estimates matches its closed form:
    # max-entropy with two phenotypes is logistic in the payoff difference (Jaynes 1957),
    # q(divide | y) = 1 / (1 + exp(-beta (y / (y + half) - roam_value))).
    law = result.law
    half, roam = cal["estimates"]["half"], cal["estimates"]["roam_value"]
    import numpy as np

    y = np.arange(7.0)
    expected = 1.0 / (1.0 + np.exp(-beta * (y / (y + half) - roam)))
    k = int(np.argmin(np.abs(law.densities - 0.4)))
    assert np.allclose(law.table[k][:, 0], expected, atol=1e-6)


@pytest.fixture()
def folder(tmp_path):
    shutil.copy(STUDIES / "calibrated-counts.csv", tmp_path / "calibrated-counts.csv")
    return tmp_path


def _both(folder, text, capsys):
    """Lines of `check` and of `run` for one study text (run must write nothing)."""
    path = folder / "study.toml"
    path.write_text(text, encoding="utf-8")
    assert main(["check", str(path)]) == 2
    checked = capsys.readouterr().err.strip().splitlines()
    assert main(["run", str(path), "--out", str(folder / "out"), "--quiet"]) == 2
    ran = capsys.readouterr().err.strip().splitlines()
    assert not (folder / "out").exists()
    assert checked == ran
    return checked


@pytest.mark.parametrize("old, new, expected", [
    ('roam_value = [0.0, 1.0] }', 'roam_value = [0.0, 1.0], speed = [0.0, 1.0] }',
     "calibration.free.speed: no payoff expression names this parameter"),
    ('half = [0.2, 10.0]', 'half = [10.0, 0.2]', "calibration.free.half: bounds must satisfy low < high"),
    ('half = [0.2, 10.0]', 'half = [0.2]', "calibration.free.half: bounds are [low, high]"),
    ('beta = [0.5, 30.0], ', '', "calibration.free: fit beta"),
    ('data = "calibrated-counts.csv"', 'data = "missing.csv"', "calibration.data: names no readable file"),
    ('starts = 4', 'starts = 4\nwhat = 1', "calibration.what: Extra inputs are not permitted"),
    ('roam = "roam_value"', 'roam = "roam_value + other"', "payoff.roam: unknown name 'other'"),
])
def test_bad_calibration_sections(folder, capsys, old, new, expected):
    assert old in DEMO
    lines = _both(folder, DEMO.replace(old, new), capsys)
    assert any(line.startswith(f"{folder / 'study.toml'}: {expected}") for line in lines), lines


def test_bad_data_is_refused_by_check_and_run_alike(folder, capsys):
    (folder / "calibrated-counts.csv").write_text(
        "density,state,phenotype,count\n0.1,0,divide,3\n0.1,0,sleep,2\n", encoding="utf-8")
    lines = _both(folder, DEMO, capsys)
    assert len(lines) == 1 and "calibration.data: column 'phenotype' names unknown phenotype 'sleep'" in lines[0]


def test_the_fit_cannot_be_skipped_when_the_payoff_needs_it(folder, capsys):
    path = folder / "study.toml"
    path.write_text(DEMO, encoding="utf-8")
    assert main(["run", str(path), "--out", str(folder / "out"), "--quiet", "--skip", "calibration"]) == 2
    assert "calibration stage cannot be skipped" in capsys.readouterr().err
    assert not (folder / "out").exists()
    # With only beta free, skipping runs at the study's own beta, and --only law still fits first.
    fixed = DEMO.replace("free = { beta = [0.5, 30.0], half = [0.2, 10.0], roam_value = [0.0, 1.0] }",
                         "free = { beta = [0.5, 30.0] }\nfixed = { half = 2.0, roam_value = 0.45 }")
    study = sl.load_study(fixed.replace('data = "', f'data = "{folder}/'))
    skipped = study.run(skip="calibration,population").summary
    assert "calibration" not in skipped and skipped["stages"] == ["law"]
    only = study.run(only="law").summary
    assert only["stages"] == ["calibration", "law"]
    low, high = only["calibration"]["intervals_95"]["beta"]
    assert low < 6.0 < high
