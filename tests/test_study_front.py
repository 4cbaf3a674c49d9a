"""The [front] study section: travelling fronts of the study's mean-field model."""

import json

import pytest

import switchlaw as sl
from switchlaw.cli._main import main

# One phenotype dividing into free space at r = 1 with diffusion D = 1: Fisher-KPP,
# u_t = D u_xx + r u (1 - u), whose spreading speed is c* = 2 sqrt(r D) = 2 with decay rate
# lambda* = sqrt(r / D) = 1 (Fisher 1937; Kolmogorov, Petrovsky & Piskunov 1937).
FISHER = """
[study]
title = "Fisher-KPP front (invented)"
phenotypes = ["grow"]

[senses]
kind = "neighbours"
neighbours = 2

[payoff]
grow = 1.0

[decision]
beta = 1.0
densities = { start = 0.0, stop = 1.0, points = 5 }

[population]
division = { grow = 1.0 }
death = { grow = 0.0 }
betas = { start = 0.5, stop = 2.0, points = 2 }

[front]
diffusion = { grow = 1.0 }
length = 100.0
dx = 0.25
t_end = 20.0
frames = 41
scan = { start = 0.5, stop = 1.5, points = 2 }
"""


def test_fisher_front_speed_units_report_and_verdict(tmp_path):
    result = sl.load_study(FISHER).run(out=tmp_path / "out", only="front")
    front = result.summary["front"]
    run = front["runs"][0]
    assert run["beta"] == 1.0 and run["kind"] == "pulled" and run["status"] == "ok"
    assert run["linear_speed"] == pytest.approx(2.0, rel=1e-9)  # c* = 2 sqrt(r D)
    assert run["decay_rate"] == pytest.approx(1.0, rel=1e-6)    # lambda* = sqrt(r / D)
    # A pulled front from a step approaches c* from below (Bramson 1983 log correction).
    assert 0.9 * 2.0 < run["speed"] <= 2.0 * 1.001
    assert front["units"]["speed"] == "length units per time unit"
    assert len(front["scan"]["speed"]) == 2
    verdict = result.summary["verdict"]
    assert verdict["front"]["kind"] == "pulled" and verdict["front"]["unit"] == "length units per time unit"
    assert any(s["section"] == "front" and "pulled" in s["text"] for s in verdict["sentences"])
    assert result.summary["stages"] == ["law", "front"]
    html = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert "Travelling fronts" in html
    assert {"figures/front_profiles.png", "figures/front_position.png",
            "figures/front_speeds.png"} <= set(result.written)


@pytest.mark.parametrize("old, new, expected", [
    ("diffusion = { grow = 1.0 }", "diffusion = { grow = -1.0 }", "front.diffusion.grow: diffusion coefficients must be finite and >= 0"),
    ("diffusion = { grow = 1.0 }", "diffusion = { grow = 0.0 }", "front.diffusion: at least one phenotype must diffuse"),
    ("diffusion = { grow = 1.0 }", "diffusion = { grow = 1.0, fly = 1.0 }", "front.diffusion.fly: unknown phenotype"),
    ("dx = 0.25", "dx = 200.0", "front.dx: the grid spacing must be finite and below front.length"),
    ("dx = 0.25", "dx = 0.001", "front.dx: at most 20000 grid cells"),
    ("frames = 41", "frames = 41\ndimension = 4", "front.dimension: Input should be 1, 2 or 3"),
])
def test_bad_front_sections(tmp_path, capsys, old, new, expected):
    path = tmp_path / "study.toml"
    path.write_text(FISHER.replace(old, new), encoding="utf-8")
    assert main(["check", str(path)]) == 2
    checked = capsys.readouterr().err.strip().splitlines()
    assert any(line.startswith(f"{path}: {expected}") for line in checked), checked
    assert main(["run", str(path), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    assert capsys.readouterr().err.strip().splitlines() == checked
    assert not (tmp_path / "out").exists()


def test_front_needs_population_and_a_run_time_refusal_names_the_section(tmp_path, capsys):
    no_population = FISHER.split("[population]")[0] + "[front]" + FISHER.split("[front]")[1]
    with pytest.raises(sl.InputError, match="front: needs a \\[population\\] section"):
        sl.load_study(no_population)
    # A domain too short for the run is found by the front code: one line naming the section.
    path = tmp_path / "short.toml"
    path.write_text(FISHER.replace("length = 100.0", "length = 20.0").replace("dx = 0.25", "dx = 0.2"),
                    encoding="utf-8")
    assert main(["run", str(path), "--out", str(tmp_path / "out"), "--quiet", "--only", "front"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and ": front: `length`" in err[0] and "too short" in err[0]
    assert not (tmp_path / "out").exists()
    assert main(["run", str(path), "--out", str(tmp_path / "out"), "--quiet", "--skip", "front"]) == 0
    assert "front" not in json.loads((tmp_path / "out" / "summary.json").read_text(encoding="utf-8"))
