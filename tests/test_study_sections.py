"""Study sections [extinction], [lattice], [fluctuating], [schedule], [sensitivity], [[variant]];
the verdict; --only/--skip; compare; the verdict-first report."""

import json
import math
import shutil
import subprocess

import numpy as np
import pytest

import switchlaw as sl
from switchlaw.cli._main import main
from switchlaw.cli._study import StudyError, load_text

SMALL = """
[study]
title = "Small test study (invented)"
seed = 3
phenotypes = ["divide", "roam"]

[senses]
kind = "neighbours"
neighbours = 6

[payoff]
divide = "y / 6"
roam = "1 - y / 6"

[decision]
objective = "max-entropy"
beta = 12.0
densities = { start = 0.0, stop = 1.0, points = 21 }

[population]
division = { divide = 1.0, roam = 0.0 }
death = { divide = 0.27, roam = 0.27 }
betas = { start = 0.05, stop = 20.0, points = 8 }

[extinction]
sites = 40
founders = [2, 10, 16]
betas = [4.0]
replicates = 30
tau = 0.5

[lattice]
rows = 8
columns = 8
t_end = 2.0
replicates = 2
snapshots = 2

[fluctuating]
states = ["crowded", "sparse"]
fitness = { divide = [2.0, 0.3], roam = [0.6, 1.5] }
statistics = "iid"
probabilities = [0.5, 0.5]
cue_error = 0.2
cost_per_bit = 0.05
betas = { start = 0.0, stop = 10.0, points = 11 }

[schedule]
t_end = 12.0
regrowth_density = 0.5
tolerant = "roam"
treatment = true
stress = { death = { divide = 0.9 } }
plans = [ { name = "short", on = 1.0, off = 3.0, cycles = 2 }, { name = "long", on = 2.0, off = 6.0, cycles = 1 } ]

[sensitivity]
parameters = ["beta", "death.divide"]
sobol = { ranges = { death_scale = [0.8, 1.2] }, samples = 4 }

[[variant]]
name = "dearer sensing"
decision = { beta = 6.0 }
"""


def errors_of(text):
    with pytest.raises(StudyError) as info:
        load_text(text, "study.toml")
    return info.value.lines


@pytest.fixture(scope="module")
def small_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sections")
    study = folder / "small.toml"
    study.write_text(SMALL, encoding="utf-8")
    out = folder / "out"
    assert main(["run", str(study), "--out", str(out), "--quiet"]) == 0
    return study, out, json.loads((out / "summary.json").read_text(encoding="utf-8"))


def _model():
    """The small study's mean-field model, built through the public API."""
    return sl.MeanField(
        {"divide": lambda y: y / 6, "roam": lambda y: 1 - y / 6},
        lambda rho: sl.occupancy(6, rho),
        division=[1.0, 0.0], death=[0.27, 0.27], objective="max-entropy", phenotypes=["divide", "roam"],
    )


# --------------------------------------------------------------------------- every section via the CLI
def test_every_section_runs_through_the_command_line(small_run):
    _, out, summary = small_run
    for key in ("verdict", "extinction", "lattice", "fluctuating", "schedule", "sensitivity", "variants"):
        assert key in summary, key
    assert summary["stages"] == ["law", "population", "extinction", "lattice", "fluctuating", "schedule",
                                 "sensitivity", "variants"]
    names = {p.name for p in (out / "figures").iterdir()}
    for stem in ("extinction", "lattice_snapshots", "lattice_density", "fluctuating", "schedule",
                 "sensitivity_sobol", "sensitivity_local", "variants"):
        assert f"{stem}.png" in names and f"{stem}.svg" in names
    ext = summary["extinction"]
    assert [c["beta"] for c in ext["curves"]] == [12.0, 4.0]
    sim = ext["curves"][0]["simulated"]
    assert sim["replicates"] == 30 and len(sim["interval_95"]) == 3
    assert summary["variants"][0]["name"] == "dearer sensing"
    assert summary["variants"][0]["at_study_beta"]["beta"] == 6.0
    plans = summary["schedule"]["plans"]
    assert [p["name"] for p in plans] == ["short", "long"] and plans[0]["total_stress"] == plans[1]["total_stress"]
    assert all(p["regrowth_time"] == "never" or p["regrowth_time"] >= 0 for p in plans)
    sobol = summary["sensitivity"]["sobol"][0]
    assert sobol["parameters"] == ["death_scale"]


def test_verdict_numbers_equal_the_api(small_run):
    _, _, summary = small_run
    verdict = summary["verdict"]
    model = _model()
    assert verdict["regime"] == model.regime(12.0)
    assert verdict["allee_threshold"]["value"] == pytest.approx(model.allee_threshold(12.0), rel=1e-9)
    assert verdict["allee_threshold"]["unit"] == "fraction of sites"
    # Extinction: the exact risk from the public first-step solution with the API's fractions.
    K, upper, n0 = 40, 20, 2
    n = np.arange(upper + 1)
    f = np.array([model.fractions(k / K, 12.0) if 0 < k < upper else [0.5, 0.5] for k in n])
    birth = n * (f @ [1.0, 0.0]) * (1 - n / K)
    death = n * (f @ [0.27, 0.27])
    expected = sl.hitting_probability(birth, death, n0, upper)
    assert verdict["extinction"]["founders"] == n0
    assert verdict["extinction"]["risk"] == pytest.approx(expected, rel=1e-12, abs=1e-15)
    # Long-run growth at the study's beta: the public sensing_tradeoff on the same inputs.
    fitness = np.array([[2.0, 0.6], [0.3, 1.5]])
    scan = sl.sensing_tradeoff(fitness, [0.5, 0.5], sl.symmetric_cue(2, 0.2), [12.0], cost_per_bit=0.05)
    assert verdict["long_run_growth"]["value"] == pytest.approx(scan.growth_rate[0], rel=1e-12)
    hedge = sl.bet_hedging(fitness, [0.5, 0.5])
    assert verdict["long_run_growth"]["bet_hedging_growth"] == pytest.approx(hedge.growth_rate, rel=1e-12)
    # Critical betas nearest to the study's: from the API's continuation over the same range.
    points = model.critical_betas(0.05, 20.0)
    below = max((c.beta for c in points if c.beta <= 12.0), default=None)
    assert below is not None
    assert verdict["nearest_critical_betas"][0]["beta"] == pytest.approx(below, rel=1e-6)


def test_report_leads_with_the_verdict_and_keeps_the_study_last(small_run):
    _, out, _ = small_run
    report = (out / "report.html").read_text(encoding="utf-8")
    verdict, first_figure, study = report.index('id="verdict"'), report.index("<figure"), report.index('id="study"')
    assert verdict < first_figure < study
    assert report.count("<figure") == report.count("<figcaption>") >= 11
    assert report.count("Research use only") >= 3  # top, the treatment schedule, the end
    assert 'name="viewport"' in report and "@media print" in report
    assert "http://" not in report.replace("http://www.w3.org", "") and "<script" not in report


def test_only_and_skip_choose_stages(small_run, tmp_path, capsys):
    study, _, _ = small_run
    out = tmp_path / "only"
    assert main(["run", str(study), "--out", str(out), "--quiet", "--only", "law,extinction"]) == 0
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["stages"] == ["law", "extinction"]
    assert "extinction" in summary and "population" not in summary and "lattice" not in summary
    skipped = tmp_path / "skip"
    assert main(["run", str(study), "--out", str(skipped), "--quiet", "--only", "law,schedule,fluctuating",
                 "--skip", "schedule"]) == 0
    summary = json.loads((skipped / "summary.json").read_text(encoding="utf-8"))
    assert "fluctuating" in summary and "schedule" not in summary
    for args, message in ((["--only", "law,bogus"], "--only: unknown stage 'bogus'"),
                          (["--skip", "law"], "--skip: the law stage cannot be skipped"),
                          (["--only", "regime_map"], "--only: the study has no [regime_map] section")):
        bad = tmp_path / "bad"
        assert main(["run", str(study), "--out", str(bad), "--quiet", *args]) == 2
        assert message in capsys.readouterr().err
        assert not bad.exists()


def test_compare_writes_one_report(small_run, tmp_path, capsys):
    study, out, _ = small_run
    other = tmp_path / "other"
    assert main(["run", str(study), "--out", str(other), "--quiet", "--only", "law,extinction"]) == 0
    both = tmp_path / "both"
    assert main(["compare", str(out), str(other), "--out", str(both)]) == 0
    page = (both / "report.html").read_text(encoding="utf-8")
    assert page.count("data:image/png;base64,") >= 6 and "Not in this run." in page
    assert "Research use only" in page
    assert main(["compare", str(out), str(tmp_path / "missing"), "--out", str(tmp_path / "x")]) == 2
    assert "no readable summary.json" in capsys.readouterr().err
    assert not (tmp_path / "x").exists()


def test_allee_threshold_derivative_matches_central_differences(small_run):
    # Reference: central differences of thresholds located independently by the public API,
    # with the step h = 1e-4 (truncation error O(h^2)).
    _, _, summary = small_run
    entry = next(e for e in summary["sensitivity"]["equilibria"] if e["allee_threshold"])

    def threshold(death_divide):
        model = sl.MeanField(
            {"divide": lambda y: y / 6, "roam": lambda y: 1 - y / 6}, lambda rho: sl.occupancy(6, rho),
            division=[1.0, 0.0], death=[death_divide, 0.27], objective="max-entropy", phenotypes=["divide", "roam"])
        return model.allee_threshold(12.0)

    h = 1e-4
    slope = (threshold(0.27 + h) - threshold(0.27 - h)) / (2 * h)
    assert entry["density"] == pytest.approx(threshold(0.27), rel=1e-9)
    assert entry["derivatives"]["death.divide"] == pytest.approx(slope, rel=1e-3)


# --------------------------------------------------------------------------- numbers against references
def test_chain_extinction_matches_a_direct_linear_solve():
    # Reference: the first-step equations P_n = b_n/(b_n+d_n) P_{n+1} + d_n/(b_n+d_n) P_{n-1},
    # P_0 = 1, P_M = 0 (Karlin & Taylor 1975, ch. 4), solved as a banded system by scipy.
    from scipy.linalg import solve_banded

    from switchlaw.stochastic._founders import chain_extinction

    model = _model()
    K, M, beta = 40, 20, 12.0
    result = chain_extinction(model, beta, sites=K, established=M, sizes=[1, 5, 19])
    n = np.arange(1, M)
    f = np.array([model.fractions(k / K, beta) for k in n])
    b = n * f[:, 0] * (1 - n / K)
    d = n * (f @ [0.27, 0.27])
    up, down = b / (b + d), d / (b + d)
    bands = np.zeros((3, M - 1))
    bands[0, 1:] = -up[:-1]
    bands[1] = 1.0
    bands[2, :-1] = -down[1:]
    rhs = np.zeros(M - 1)
    rhs[0] = down[0]
    P = solve_banded((1, 1), bands, rhs)
    np.testing.assert_allclose(result.probability, P[[0, 4, 18]], rtol=1e-9)
    # The one-half crossing interpolates linearly between the whole sizes around it.
    k = int(np.nonzero(P < 0.5)[0][0])
    expected = n[k - 1] + (P[k - 1] - 0.5) / (P[k - 1] - P[k])
    assert result.half == pytest.approx(expected, rel=1e-9)


def test_neighbour_clustering_against_random_placement_and_a_checkerboard():
    from switchlaw.stochastic._founders import neighbour_clustering

    lattice = sl.Lattice((20, 20), neighbourhood="von-neumann")
    # n cells placed uniformly among S sites: P(a given other site occupied | occupied) = (n-1)/(S-1)
    # exactly (sampling without replacement), so the ratio to n/S is (n-1) S / ((S-1) n).
    layouts = lattice.scatter(0.3, seed=5, replicates=400)
    S, cells = 400, 120
    expected = (cells - 1) * S / ((S - 1) * cells)
    per = np.array([neighbour_clustering(lattice, layout) for layout in layouts])
    assert abs(per.mean() - expected) < 4 * per.std(ddof=1) / np.sqrt(per.size)
    # A checkerboard has no occupied von Neumann neighbours; a full lattice has all of them.
    r, c = np.indices((20, 20))
    assert neighbour_clustering(lattice, (r + c) % 2 == 0) == 0.0
    assert neighbour_clustering(lattice, np.ones((20, 20), dtype=bool)) == pytest.approx(1.0)


def test_scheduled_run_follows_the_piecewise_logistic_closed_form():
    # With both phenotypes alike, g(rho) = b (1 - rho) - d whatever the law: logistic growth
    # rho' = r rho (1 - rho / C), r = b - d, C = 1 - d / b, whose solution is
    # rho(t) = C rho0 e^{rt} / (C + rho0 (e^{rt} - 1)) (Verhulst; any ODE text, e.g. Murray,
    # Mathematical Biology I, 3rd ed., eq. 1.6).
    from switchlaw.population._schedule import scheduled_run, stress_periods

    def build(death):
        return sl.MeanField({"a": lambda y: y / 4, "b": lambda y: 1 - y / 4},
                            lambda rho: sl.occupancy(4, rho), division=[1.0, 1.0], death=[death, death],
                            phenotypes=["a", "b"])

    def logistic(rho0, t, b, d):
        r, C = b - d, 1 - d / b
        return C * rho0 * np.exp(r * t) / (C + rho0 * np.expm1(r * t))

    calm, stress = build(0.2), build(1.4)
    periods = stress_periods(on=1.5, off=4.0, cycles=2, delay=1.0)
    run = scheduled_run(calm, stress, 3.0, 0.6, periods=periods, t_end=16.0, regrowth_density=0.7)
    rho, t = 0.6, 0.0
    expected = {}
    for start, end in np.vstack([[[0.0, 0.0]], periods]):
        rho = logistic(rho, start - t, 1.0, 0.2) if start > t else rho  # calm until the stress
        rho = logistic(rho, end - start, 1.0, 1.4) if end > start else rho  # stress (decline)
        expected[end] = rho
        t = end
    for end, value in expected.items():
        if end > 0:
            i = int(np.argmin(np.abs(run.times - end)))
            assert run.density[i] == pytest.approx(value, rel=1e-5)
    # Regrowth from rho_e to level L on the calm logistic: t = ln(L (C - rho_e) / (rho_e (C - L))) / r.
    rho_e, C, r, L = expected[periods[-1, 1]], 0.8, 0.8, 0.7
    assert run.regrowth_time == pytest.approx(math.log(L * (C - rho_e) / (rho_e * (C - L))) / r, rel=2e-3)
    never = scheduled_run(calm, stress, 3.0, 0.6, periods=periods, t_end=16.0, regrowth_density=0.9)
    assert never.regrowth_time is None  # above the calm carrying capacity 0.8


# --------------------------------------------------------------------------- bad input
BAD = [
    ("founders = [2, 10, 16]", "founders = [10, 2]", "extinction.founders: founder sizes must be >= 1 and increasing"),
    ("founders = [2, 10, 16]", "founders = [2, 30]", "extinction.founders: every founder size must be below the established size (20)"),
    ("sites = 40", "sites = 40\nestablished = 50", "extinction.established: must be at most extinction.sites (40)"),
    ("replicates = 30\ntau = 0.5", "replicates = 30", "extinction.tau: required for replicates > 0"),
    ("rows = 8", "rows = 7", "lattice.rows: a periodic hexagonal lattice needs an even number of rows"),
    ("t_end = 2.0\nreplicates = 2", "t_end = 2.0\nreplicates = 2\nneighbourhood = \"moore\"", "lattice.neighbourhood: a moore cell senses 8 neighbours"),
    ("t_end = 2.0\nreplicates = 2", "t_end = 2.0\nreplicates = 2\nmotility = { swim = 1.0 }", "lattice.motility.swim: unknown phenotype"),
    ("probabilities = [0.5, 0.5]", "probabilities = [0.5, 0.6]", "fluctuating.probabilities: needs 2 probabilities >= 0 that sum to 1"),
    ("probabilities = [0.5, 0.5]", "probabilities = [0.5, 0.5]\ndurations = [2, 3]", "fluctuating.durations: only for statistics = \"periodic\""),
    ('statistics = "iid"\nprobabilities = [0.5, 0.5]', 'statistics = "markov"', "fluctuating.transition: required when statistics = \"markov\""),
    ("fitness = { divide = [2.0, 0.3], roam = [0.6, 1.5] }", "fitness = { divide = [2.0, -0.3], roam = [0.6, 1.5] }", "fluctuating.fitness.divide: fitness must be finite and >= 0"),
    ("fitness = { divide = [2.0, 0.3], roam = [0.6, 1.5] }", "fitness = { divide = [2.0, 0.3] }", "fluctuating.fitness.roam: missing fitness for a phenotype"),
    ("cue_error = 0.2", "cue_error = 1.5", "fluctuating.cue_error: Input should be less than 1"),
    ("stress = { death = { divide = 0.9 } }", "stress = { death = { divide = -0.9 } }", "schedule.stress.death.divide: rates must be finite and >= 0"),
    ("stress = { death = { divide = 0.9 } }", "stress = { payoff = { divide = \"y / q\" } }", "schedule.stress.payoff.divide: unknown name 'q'"),
    ("stress = { death = { divide = 0.9 } }", "stress = {}", "schedule.stress: name at least one of division, death, payoff"),
    ('tolerant = "roam"', 'tolerant = "sleep"', "schedule.tolerant: unknown phenotype"),
    ("t_end = 12.0\nregrowth", "t_end = 5.0\nregrowth", "schedule.plans[0]: lasts 8 time units, longer than schedule.t_end (5)"),
    ('{ name = "long"', '{ name = "short"', "schedule.plans: plan names must be distinct"),
    ('parameters = ["beta", "death.divide"]', 'parameters = ["beta", "death.swim"]', "sensitivity.parameters[1]: unknown parameter"),
    ('parameters = ["beta", "death.divide"]', 'parameters = ["tau"]', "sensitivity.parameters[0]: tau needs population.tau"),
    ("samples = 4", "samples = 6", "sensitivity.sobol.samples: must be a power of 2"),
    ("death_scale = [0.8, 1.2]", "death_scale = [1.2, 0.8]", "sensitivity.sobol.ranges.death_scale: needs [low, high]"),
    ("death_scale = [0.8, 1.2]", "crowding = [0.8, 1.2]", "sensitivity.sobol.ranges.crowding: unknown parameter"),
    ('name = "dearer sensing"', 'name = "dearer sensing"\nstudy = { seed = 4 }', "variant[0].study: a variant cannot override this section"),
    ('decision = { beta = 6.0 }', 'decision = { beta = -6.0 }', "variant[0].decision.beta: Input should be greater than or equal to 0"),
    ('decision = { beta = 6.0 }', 'population = { death = { divide = -1.0 } }', "variant[0].population.death.divide: rates must be finite and >= 0"),
    ('[[variant]]\nname = "dearer sensing"', '[[variant]]\nname = ""', "variant[0].name: String should have at least 1 character"),
]


@pytest.mark.parametrize("old, new, expected", BAD)
def test_bad_section_input_is_one_line_naming_the_key(old, new, expected):
    assert old in SMALL, old
    lines = errors_of(SMALL.replace(old, new, 1))
    assert any(line.startswith(f"study.toml: {expected}") for line in lines), lines
    assert all("\n" not in line for line in lines)


def test_a_section_needs_population_and_a_beta():
    no_population = SMALL.split("[population]")[0] + "[extinction]\nsites = 40\nfounders = [1]\n"
    assert any(line.startswith("study.toml: extinction: needs a [population] section")
               for line in errors_of(no_population))
    budget = SMALL.replace("beta = 12.0\n", "bits = 0.3\nobjective = \"min-information\"\n", 1).replace(
        'objective = "max-entropy"\n', "", 1)
    lines = errors_of(budget)
    assert any(line.startswith("study.toml: schedule.beta: required when [decision] gives a budget in bits")
               for line in lines), lines
    assert not any("lattice" in line for line in lines)  # the lattice follows the study's budget


def test_bad_section_from_the_command_line_writes_nothing(tmp_path, capsys):
    study = tmp_path / "bad.toml"
    study.write_text(SMALL.replace("samples = 4", "samples = 6"), encoding="utf-8")
    out = tmp_path / "out"
    assert main(["run", str(study), "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == [f"{study}: sensitivity.sobol.samples: must be a power of 2 (got 6)"]
    assert not out.exists() and not any(p.name.startswith(".out") for p in tmp_path.iterdir())


def test_schema_lists_the_new_sections():
    from switchlaw.cli._study import json_schema

    properties = json_schema()["properties"]
    for key in ("extinction", "lattice", "fluctuating", "schedule", "sensitivity", "variant"):
        assert key in properties


# --------------------------------------------------------------------------- browser (slow)
CHECK = """<script>
window.addEventListener('load', () => {
  const verdict = document.getElementById('verdict');
  const first = document.querySelector('figure');
  const ahead = verdict && first && (verdict.compareDocumentPosition(first) & Node.DOCUMENT_POSITION_FOLLOWING);
  const figures = [...document.querySelectorAll('figure')];
  const captioned = figures.every(f => (f.querySelector('figcaption')?.textContent || '').trim().length > 20);
  const images = [...document.images];
  const broken = images.filter(i => !i.complete || i.naturalWidth === 0).length;
  const items = verdict ? verdict.querySelectorAll('li').length : 0;
  const links = verdict ? [...verdict.querySelectorAll('a')].every(a => document.getElementById(a.hash.slice(1))) : false;
  document.body.setAttribute('data-check',
    `verdict-first=${!!ahead} items=${items} links=${links} figures=${figures.length} captioned=${captioned} images=${images.length} broken=${broken}`);
});
</script></body>"""


@pytest.mark.slow
def test_report_in_a_headless_browser(small_run, tmp_path):
    # Needs Debian's chromium (apt-get install chromium); run with `python -m pytest -m slow`.
    browser = shutil.which("chromium")
    assert browser, "install chromium to run the browser check"
    _, out, _ = small_run
    page = tmp_path / "report.html"
    # The report's Content-Security-Policy forbids scripts; the copy drops it to run the check.
    text = (out / "report.html").read_text(encoding="utf-8")
    text = "\n".join(line for line in text.splitlines() if "Content-Security-Policy" not in line)
    page.write_text(text.replace("</body>", CHECK), encoding="utf-8")
    done = subprocess.run(
        [browser, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-sync",
         "--disable-background-networking", "--disable-component-update", f"--user-data-dir={tmp_path / 'p'}",
         "--virtual-time-budget=10000", "--dump-dom", page.as_uri()],
        capture_output=True, text=True, encoding="utf-8", timeout=120, check=True,
    )
    marker = done.stdout.split('data-check="')[1].split('"')[0]
    fields = dict(part.split("=") for part in marker.split())
    assert fields["verdict-first"] == "true" and fields["links"] == "true"
    assert int(fields["items"]) >= 8
    assert fields["captioned"] == "true" and int(fields["figures"]) >= 11
    assert int(fields["images"]) == int(fields["figures"]) and fields["broken"] == "0"
