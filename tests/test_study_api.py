"""Study files from Python: load_study / demo_study / .replace / .run agree with the command line."""

import json
import math
import tomllib
from pathlib import Path

import pytest

import switchlaw as sl
from switchlaw.cli._main import main

ROOT = Path(__file__).resolve().parents[1]
STUDIES = ROOT / "src" / "switchlaw" / "cli" / "studies"

# A quick study: the law, the trade-off and the mean-field regimes over a short beta grid.
QUICK = """
[study]
title = "Quick two-phenotype study (invented)"
seed = 3
phenotypes = ["divide", "roam"]

[senses]
kind = "neighbours"
neighbours = 4

[payoff]
divide = "y / 4"
roam = "1 - y / 4"

[decision]
objective = "max-entropy"
beta = 6.0
densities = { start = 0.0, stop = 1.0, points = 11 }

[population]
division = { divide = 1.0, roam = 0.0 }
death = { divide = 0.3, roam = 0.3 }
betas = { start = 0.5, stop = 12.0, points = 6 }

[exports]
formats = ["csv"]
"""


def test_run_from_python_gives_the_numbers_of_switchlaw_run(tmp_path):
    path = tmp_path / "quick.toml"
    path.write_text(QUICK, encoding="utf-8")
    assert main(["run", str(path), "--out", str(tmp_path / "cli"), "--quiet"]) == 0
    written = json.loads((tmp_path / "cli" / "summary.json").read_text(encoding="utf-8"))
    study = sl.load_study(path)
    assert isinstance(study, sl.StudyFile)
    assert study.title == "Quick two-phenotype study (invented)"
    in_memory = study.run()
    assert in_memory.out is None and in_memory.written == ()
    assert in_memory.summary == written
    assert in_memory.verdict == written["verdict"]
    # The same study given as text, and written through the output-folder code.
    again = sl.load_study(QUICK).run(out=tmp_path / "api")
    assert again.summary == written
    assert (tmp_path / "api" / "report.html").is_file() and "summary.json" in again.written
    # The folder is refused a second time unless forced, like --out.
    with pytest.raises(sl.InputError, match="already exists"):
        sl.load_study(QUICK).run(out=tmp_path / "api")
    assert sl.load_study(QUICK).run(out=tmp_path / "api", force=True).summary == written


def test_a_changed_key_changes_the_result_and_is_validated_again():
    study = sl.load_study(QUICK)
    changed = study.replace({"decision.beta": 0.0})
    assert study.spec.decision.beta == 6.0 and changed.spec.decision.beta == 0.0
    assert tomllib.loads(changed.text)["decision"]["beta"] == 0.0
    before, after = study.run().summary, changed.run().summary
    # At beta = 0 the max-entropy law ignores the signal: q(x | y) = 1/2 for two phenotypes
    # (maximum entropy, Jaynes 1957), so the information used is zero bits.
    assert max(after["law"]["information_bits"]) == pytest.approx(0.0, abs=1e-9)
    assert max(before["law"]["information_bits"]) > 0.1
    assert after["at_study_beta"]["beta"] == 0.0
    # Removing a section removes its stage; whole sections can be given by name.
    lean = study.replace(population=None)
    assert lean.spec.population is None and "population" not in lean.run().summary
    # A bad change is refused with the one-line error `check` gives, naming the key.
    with pytest.raises(sl.InputError) as info:
        study.replace({"decision.beta": -1.0})
    assert str(info.value).startswith("<text>: decision.beta: Input should be greater than or equal to 0")
    with pytest.raises(sl.InputError, match="not a key path"):
        study.replace({"decision..beta": 1.0})


def test_bad_text_gives_the_lines_of_check(tmp_path, capsys):
    bad = QUICK.replace('roam = "1 - y / 4"', 'roam = "1 - z / 4"').replace("neighbours = 4", 'neighbours = "four"')
    path = tmp_path / "bad.toml"
    path.write_text(bad, encoding="utf-8")
    assert main(["check", str(path)]) == 2
    printed = capsys.readouterr().err.strip().splitlines()
    with pytest.raises(sl.InputError) as info:
        sl.load_study(path)
    assert str(info.value).splitlines() == printed
    assert all(line.startswith(f"{path}: ") for line in printed)
    with pytest.raises(sl.InputError, match="cannot be read"):
        sl.load_study(tmp_path / "missing.toml")
    with pytest.raises(sl.InputError, match="not valid TOML"):
        sl.load_study("[study\ntitle = 1")


def test_demo_studies_are_the_bundled_files():
    for name in ("colony", "dormancy", "pulsed"):
        study = sl.demo_study(name)
        assert study.text == (STUDIES / f"{name}.toml").read_text(encoding="utf-8")
        assert study.source == f"demo:{name}"
        assert "invented" in (study.title + study.spec.study.notes).lower()
    with pytest.raises(sl.InputError, match="unknown demo"):
        sl.demo_study("nowhere")


def test_a_demo_can_be_narrowed_and_rerun():
    # Only the law stage of the colony demo, at another beta: fast, and a different law.
    colony = sl.demo_study("colony")
    base = colony.run(only="law").summary
    other = colony.replace({"decision.beta": 2.0}).run(only="law").summary
    assert base["stages"] == ["law"] == other["stages"]
    assert not math.isclose(max(base["law"]["information_bits"]), max(other["law"]["information_bits"]))
    with pytest.raises(sl.InputError, match="unknown stage"):
        colony.run(only="nothing")


def test_summary_numbers_carry_their_units():
    summary = sl.load_study(QUICK).run().summary
    units = summary["units"]
    # Every number of the core keys has a unit (the names are the trade's: nats per payoff unit
    # for beta, bits for information, fraction of sites for density; common practice, no source).
    def leaves(value, path):
        if isinstance(value, dict):
            for key, inner in value.items():
                yield from leaves(inner, f"{path}.{key}" if path else key)
        elif isinstance(value, list):
            for inner in value:
                yield from leaves(inner, path)
        elif isinstance(value, float):
            yield path

    for key in ("law", "tradeoff", "at_study_beta", "population"):
        for path in leaves(summary[key], key):
            parents = [path.rsplit(".", k)[0] for k in range(path.count(".") + 1)]
            assert any(p in units for p in parents), path
    assert units["law.betas"] == "nats per payoff unit" and units["law.information_bits"] == "bits"
    assert summary["verdict"]["beta"]["unit"] == "nats per payoff unit"
    timed = sl.load_study(QUICK.replace('seed = 3', 'seed = 3\ntime_unit = "hour"')).replace(population=None)
    assert timed.run().summary["units"]["population.regimes.low_density_growth"] == "per hour"
