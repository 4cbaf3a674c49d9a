"""Safety of runs: output folders, one run per --out, killed runs, check = run, no script.

The reference for these checks is the public contract of issue 14 (common practice for
command-line tools, no source): ``--force`` never deletes a file switchlaw did not write,
``check`` exits 0 only if ``run`` passes validation, markup in a study shows as text.
"""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from switchlaw.cli import _pipeline
from switchlaw.cli._main import main
from switchlaw.cli._outputs import MARKER, OutputFolder

ROOT = Path(__file__).resolve().parents[1]
STUDIES = ROOT / "src" / "switchlaw" / "cli" / "studies"
COLONY = (STUDIES / "colony.toml").read_text(encoding="utf-8")
DORMANCY = (STUDIES / "dormancy.toml").read_text(encoding="utf-8")

#: A study with no population model: the whole run takes a second or two.
FAST = """\
[study]
title = "Fast check study (invented)"
notes = "Invented scenario."
seed = 1
phenotypes = ["divide", "roam"]

[senses]
kind = "neighbours"
neighbours = 4

[payoff]
divide = "y / 4"
roam = "1 - y / 4"

[decision]
beta = 3.0
densities = { start = 0.0, stop = 1.0, points = 11 }
"""


def study_file(tmp_path, text=FAST, name="study.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def run(study, out, *extra):
    return main(["run", str(study), "--out", str(out), "--quiet", *extra])


def one_error_line(capsys) -> str:
    lines = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(lines) == 1, lines
    return lines[0]


# ------------------------------------------------------------------ never delete user files
def test_force_deletes_only_what_switchlaw_wrote(tmp_path, capsys):
    study, out = study_file(tmp_path), tmp_path / "out"
    assert run(study, out) == 0
    manifest = json.loads((out / MARKER).read_text(encoding="utf-8"))
    assert "summary.json" in manifest["files"] and "report.html" in manifest["files"]
    (out / "my-notes.txt").write_text("mine")
    (out / "figures" / "my-sketch.png").write_bytes(b"mine")
    (out / "extra").mkdir()
    (out / "extra" / "data.csv").write_text("mine")
    # An earlier run wrote a file this run will not write: --force removes it.
    (out / "law.nc").write_bytes(b"old output")
    (out / MARKER).write_text(json.dumps({**manifest, "files": manifest["files"] + ["law.nc"]}))
    assert run(study, out, "--force") == 0
    assert (out / "my-notes.txt").read_text(encoding="utf-8") == "mine"
    assert (out / "figures" / "my-sketch.png").read_bytes() == b"mine"
    assert (out / "extra" / "data.csv").read_text(encoding="utf-8") == "mine"
    assert not (out / "law.nc").exists()
    assert (out / "summary.json").is_file()
    assert "my-notes.txt" not in json.loads((out / MARKER).read_text(encoding="utf-8"))["files"]
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".out.")] == []


def test_force_never_follows_a_link_out_of_the_folder(tmp_path, capsys):
    study, out = study_file(tmp_path, FAST.replace('"divide", "roam"]', '"divide", "roam", "rest"]')
                            .replace('roam = "1 - y / 4"', 'roam = "1 - y / 4"\nrest = 0.3')), tmp_path / "out"
    assert run(study, out) == 0
    assert (out / "figures" / "law-1-divide.png").is_file()
    # The user swaps figures/ for a link to their own folder that holds a same-named file.
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "law-1-divide.png").write_bytes(b"mine")
    for p in (out / "figures").iterdir():
        p.unlink()
    (out / "figures").rmdir()
    (out / "figures").symlink_to(mine)
    assert run(study, out, "--force") == 2  # a new output would land in the user's folder
    assert "is not switchlaw's" in one_error_line(capsys)
    assert (mine / "law-1-divide.png").read_bytes() == b"mine"


def test_a_folder_switchlaw_did_not_write_is_refused_unless_asked(tmp_path, capsys):
    study, out = study_file(tmp_path), tmp_path / "thesis"
    out.mkdir()
    (out / "chapter1.tex").write_text("keep")
    assert run(study, out, "--force") == 2
    line = one_error_line(capsys)
    assert "was not written by switchlaw" in line and "--into-existing" in line
    assert sorted(p.name for p in out.iterdir()) == ["chapter1.tex"]
    assert run(study, out, "--into-existing") == 0
    assert (out / "chapter1.tex").read_text(encoding="utf-8") == "keep" and (out / "report.html").is_file()
    assert "chapter1.tex" not in json.loads((out / MARKER).read_text(encoding="utf-8"))["files"]
    # Now it holds a manifest: --force replaces switchlaw's files and keeps the chapter.
    assert run(study, out, "--force") == 0
    assert (out / "chapter1.tex").read_text(encoding="utf-8") == "keep"


def test_a_user_file_with_an_output_name_is_never_overwritten(tmp_path, capsys):
    study, out = study_file(tmp_path), tmp_path / "shared"
    out.mkdir()
    (out / "summary.json").write_text("the user's own summary")
    assert run(study, out, "--into-existing") == 2
    assert "is not switchlaw's" in one_error_line(capsys)
    assert sorted(p.name for p in out.iterdir()) == ["summary.json"]
    assert (out / "summary.json").read_text(encoding="utf-8") == "the user's own summary"
    assert not any(p.name.startswith(".shared.") for p in tmp_path.iterdir())


# ------------------------------------------------------------------ one run per --out
def test_a_second_run_to_the_same_out_is_refused(tmp_path, capsys):
    study, out = study_file(tmp_path), tmp_path / "out"
    with OutputFolder(out) as first:  # another run holds --out (flock on the lock file)
        (first.work / "summary.json").write_text("{}")
        assert run(study, out) == 2
        line = one_error_line(capsys)
        assert "being written by another switchlaw run" in line and str(os.getpid()) in line
        first.commit()
    assert json.loads((out / "summary.json").read_text(encoding="utf-8")) == {}  # the first run's result stands
    assert not (tmp_path / ".out.switchlaw-lock").exists()


def _start(args, tmp_path):
    env = {**os.environ, "PYTHONPATH": str(ROOT / "src")}
    return subprocess.Popen([sys.executable, "-m", "switchlaw.cli._main", *args], cwd=tmp_path,
                            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)


def _wait_for(condition, process, seconds=120.0):
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        if condition():
            return
        assert process.poll() is None, process.stderr.read().decode()
        time.sleep(0.05)
    raise AssertionError("timed out")


def test_two_processes_one_out_and_a_killed_run_is_cleaned_up(tmp_path, capsys):
    out = tmp_path / "out"
    slow = _start(["demo", "dormancy", "--out", str(out), "--quiet"], tmp_path)
    try:
        _wait_for(lambda: any(p.name.startswith(".out.switchlaw-tmp-") for p in tmp_path.iterdir()), slow)
        # A second process while the first is computing: refused, the first untouched.
        assert run(study_file(tmp_path), out) == 2
        assert "being written by another switchlaw run" in one_error_line(capsys)
        slow.send_signal(signal.SIGKILL)
        slow.wait(timeout=30)
    finally:
        if slow.poll() is None:
            slow.kill()
            slow.wait()
        slow.stderr.close()
    orphans = [p for p in tmp_path.iterdir() if p.name.startswith(".out.switchlaw-tmp-")]
    assert len(orphans) == 1 and not out.exists()
    assert main(["run", str(study_file(tmp_path)), "--out", str(out)]) == 0
    err = capsys.readouterr().err
    assert f"removed {orphans[0]}, left by an earlier run (process {slow.pid})" in err
    assert not orphans[0].exists() and (out / "report.html").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out", "study.toml"]


# ------------------------------------------------------------------ --out checked first
@pytest.mark.parametrize("out, message", [
    ("", "is not a valid folder name"),
    ("x" * 240, "name is too long"),
    ("study.toml/out", "is not a folder"),
    ("study.toml", "exists and is not a folder"),
])
def test_an_unusable_out_fails_before_any_computation(tmp_path, capsys, monkeypatch, out, message):
    study = study_file(tmp_path)
    monkeypatch.chdir(tmp_path)

    def never(*args, **kwargs):
        raise AssertionError("computed before checking --out")

    monkeypatch.setattr(_pipeline, "run", never)
    assert main(["run", str(study), "--out", out, "--quiet"]) == 2
    assert message in one_error_line(capsys)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["study.toml"]


# ------------------------------------------------------------------ check = run
BAD = [
    # (base study, old text, new text, key path the message names)
    (COLONY, "neighbours = 6", "neighbours = 3000", "senses.neighbours"),
    (COLONY, "neighbours = 6", "neighbours = 6\nlattice_sites = 1000000000000", "senses.lattice_sites"),
    (COLONY, "beta = 12.0", "beta = 1e308", "decision.beta"),
    (COLONY, "beta = 12.0", "beta = inf", "decision.beta"),
    (COLONY, "beta = 12.0", "cost_per_bit = 1e-300", "decision.cost_per_bit"),
    (COLONY, 'objective = "max-entropy"\nbeta = 12.0', "bits = 100.0", "decision.bits"),
    (COLONY, "death = { divide = 0.27, roam = 0.27 }", "death = { divide = 1e308, roam = 0.27 }",
     "population.death.divide"),
    (COLONY, "division = { divide = 1.0, roam = 0.0 }", "division = { divide = nan, roam = 0.0 }",
     "population.division.divide"),
    (COLONY, 'divide = "y / 6"', 'divide = "y / 1e-308"', "payoff.divide"),
    (COLONY, 'divide = "y / 6"', 'divide = "1e300 * y"', "payoff.divide"),
    (COLONY, 'divide = "y / 6"', 'divide = "1 / (density - 0.37)"', "payoff.divide"),
    (COLONY, "stop = 20.0, points = 60", "stop = 1e308, points = 60", "population.betas.stop"),
    (COLONY, "points = 25", "points = 2000000", "regime_map.values.points"),
    (COLONY, 'phenotypes = ["divide", "roam"]', 'phenotypes = ["divide", ""]', "study.phenotypes[1]"),
    (COLONY, 'phenotypes = ["divide", "roam"]', 'phenotypes = ["divide", "divide"]', "study.phenotypes[1]"),
    (COLONY, 'phenotypes = ["divide", "roam"]', 'phenotypes = ["divide", "ro\\u0007am"]', "study.phenotypes[1]"),
    (COLONY, 'phenotypes = ["divide", "roam"]', f'phenotypes = ["divide", "{"r" * 65}"]', "study.phenotypes[1]"),
    (COLONY, "seed = 1", "seed = 18446744073709551616", "study.seed"),
    (DORMANCY, "sd = 0.15", "sd = 1e-300", "senses.receptor.sd"),
    (DORMANCY, 'receptor = { kind = "gaussian", sd = 0.15 }', 'receptor = { kind = "poisson", gain = 1e9 }',
     "senses"),
    (DORMANCY, "a = 0.5, b = 0.5", 'a = "0.5 - density", b = 0.5', "senses"),
    # Invalid only at density 0.35, in the middle of the grid.
    (DORMANCY, "a = 0.5, b = 0.5", 'a = "0.5 - 100 * max(0, 0.01 - abs(density - 0.35))", b = 0.5', "senses"),
    (DORMANCY, "dormant = 0.02 }", "dormant = 0.02 }\ntau = 1e-300", "population.tau"),
    (DORMANCY, 'grow = "1 - 2 * y"', 'grow = "1 - 2 * y + 1e-320 / density"', "payoff.grow"),
    (DORMANCY, "edges = [0.0, 0.1", "edges = [2.0, 3.0, 3.1", "senses"),
]


@pytest.mark.parametrize("base, old, new, key", BAD, ids=[case[3] + ":" + case[2][:20] for case in BAD])
def test_check_and_run_give_the_same_verdict(tmp_path, capsys, monkeypatch, base, old, new, key):
    assert old in base
    study = study_file(tmp_path, base.replace(old, new))

    def never(*args, **kwargs):
        raise AssertionError("run computed a study that check refuses")

    monkeypatch.setattr(_pipeline, "run", never)
    assert main(["check", str(study)]) == 2
    checked = capsys.readouterr().err.strip().splitlines()
    assert run(study, tmp_path / "out") == 2
    ran = capsys.readouterr().err.strip().splitlines()
    assert checked == ran  # the same lines, each naming the key path
    assert any(line.startswith(f"{study}: {key}") for line in ran), ran
    assert sorted(p.name for p in tmp_path.iterdir()) == ["study.toml"]


@pytest.mark.parametrize("raw, message", [
    (FAST.encode("utf-8").replace(b"invented", b"\xe9t\xe9"), "not UTF-8 text"),
    (b"a = " + b"[" * 5000 + b"]" * 5000, "nested too deeply"),
    (b"[study]\ntitle = 'x'\n" + b"# padding\n" * 200_000, "too large"),
])
def test_unreadable_study_files_fail_in_one_line(tmp_path, capsys, raw, message):
    path = tmp_path / "bad.toml"
    path.write_bytes(raw)
    assert main(["check", str(path)]) == 2
    assert message in one_error_line(capsys)
    assert run(path, tmp_path / "out") == 2
    assert message in one_error_line(capsys)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.toml"]


def test_a_study_above_the_estimated_limits_needs_yes(tmp_path, capsys, monkeypatch):
    big = COLONY.replace("beta_points = 80", "beta_points = 2000").replace("points = 25", "points = 2000")
    study = study_file(tmp_path, big)
    assert main(["check", str(study)]) == 2
    line = one_error_line(capsys)
    assert "would take about" in line and "--yes" in line
    assert main(["check", str(study), "--yes"]) == 0
    monkeypatch.setattr(_pipeline, "run", lambda *a, **k: (_ for _ in ()).throw(AssertionError("computed")))
    assert run(study, tmp_path / "out") == 2
    assert "add --yes" in one_error_line(capsys)


# ------------------------------------------------------------------ names and script
MARKUP = {
    "title": '<script>document.title="pwned"</script>Markup <b>title</b>',
    "notes": '<img src=x onerror="document.body.setAttribute(\'data-pwned\', 1)">notes & more',
    "name": "<svg onload=alert(1)>",
}


def markup_study():
    return (FAST.replace('title = "Fast check study (invented)"', f"title = '{MARKUP['title']}'")
            .replace('notes = "Invented scenario."', f"notes = '''{MARKUP['notes']}'''")
            .replace('"roam"]', f'"{MARKUP["name"]}"]').replace("roam =", f'"{MARKUP["name"]}" ='))


def test_markup_in_a_study_is_escaped_and_figure_names_are_safe(tmp_path):
    out = tmp_path / "out"
    assert run(study_file(tmp_path, markup_study()), out) == 0
    report = (out / "report.html").read_text(encoding="utf-8")
    assert "<script" not in report.lower() and "<svg onload" not in report and "<img src=x" not in report
    assert "&lt;script&gt;document.title=&#34;pwned&#34;&lt;/script&gt;Markup &lt;b&gt;title&lt;/b&gt;" in report
    assert "&lt;svg onload=alert(1)&gt;" in report
    figures = sorted(p.name for p in (out / "figures").iterdir())
    assert figures == ["law.png", "law.svg", "tradeoff.png", "tradeoff.svg"]
    three = markup_study().replace('phenotypes = ["divide",', 'phenotypes = ["divide", "../../x",').replace(
        'divide = "y / 4"', 'divide = "y / 4"\n"../../x" = 0.1')
    assert run(study_file(tmp_path, three, "three.toml"), tmp_path / "three") == 0
    names = sorted(p.name for p in (tmp_path / "three" / "figures").iterdir() if p.suffix == ".png")
    assert names == ["law-1-divide.png", "law-2-x.png", "law-3-svgonloadalert1.png", "tradeoff.png"]


@pytest.mark.slow
def test_markup_shows_as_text_and_no_script_runs_in_a_real_browser(tmp_path):
    # Needs Debian's chromium (apt-get install chromium); run with `python -m pytest -m slow`.
    # --dump-dom prints the document after scripts ran and the page loaded.
    import shutil
    from html.parser import HTMLParser

    browser = shutil.which("chromium")
    assert browser, "install chromium to run the browser check"
    out = tmp_path / "out"
    assert run(study_file(tmp_path, markup_study()), out) == 0
    dom = subprocess.run(
        [browser, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         f"--user-data-dir={tmp_path / 'profile'}", "--virtual-time-budget=3000", "--dump-dom",
         (out / "report.html").as_uri()],
        capture_output=True, timeout=120, check=True, text=True, encoding="utf-8",
    ).stdout

    class Reader(HTMLParser):
        def __init__(self):
            super().__init__()
            self.tags, self.text, self.title, self.attrs, self._in = [], [], "", [], None

        def handle_starttag(self, tag, attrs):
            self.tags.append(tag)
            self.attrs.extend(attrs)
            self._in = tag

        def handle_data(self, data):
            self.text.append(data)
            if self._in == "title":
                self.title += data

    page = Reader()
    page.feed(dom)
    assert "script" not in page.tags and "svg" not in page.tags
    assert not any(name.startswith("on") or name == "data-pwned" for name, _ in page.attrs)
    assert page.title.startswith(MARKUP["title"])  # the script did not rename the page
    text = "".join(page.text)
    for value in MARKUP.values():
        assert value in text  # shown as text, character for character
