"""Scans: determinism across executors, checkpoints (with a real kill), netCDF round trips,
Dask, ready-made point functions against closed forms, designs, and error messages."""

import functools
import json
import math
import os
import re
import signal
import socket
import subprocess
import sys
import time

import numpy as np
import pytest
import xarray as xr
from scipy.special import expit, rel_entr
from scipy.stats import binom

import switchlaw as sl
from switchlaw import analysis as sa

GRID = {"beta": np.array([0.5, 1.0, 2.0, 4.0]), "n": np.array([1, 2, 3])}
# Invented go-or-grow scenario: dividing pays in crowded neighbourhoods, moving when isolated.
PAYOFF = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}


def noisy(point, rng):
    """A point function with every kind of output: float, array, text, boolean."""
    return {
        "value": point["beta"] * point["n"] + rng.normal(),
        "draws": rng.random(3),
        "label": "high" if point["beta"] > 1 else "low",
        "heads": bool(rng.random() > 0.5),
    }


CALLS = []


def counted(point, rng):
    CALLS.append(point["x"])
    return {"square": point["x"] ** 2, "noise": rng.normal()}


def jax_precision(point, rng):
    import jax.numpy as jnp

    return {"tiny": float(jnp.asarray(1.0) + 1e-10) - 1.0, "bits": jnp.asarray(point["x"]).dtype.itemsize * 8}


def fails_at_three(point, rng):
    if point["x"] == 3:
        raise ZeroDivisionError("three is not allowed")
    return {"x": point["x"]}


def changing_shape(point, rng):
    return {"v": np.zeros(int(point["x"]))}


def hexagonal(rho):
    return sl.occupancy(6, rho)


def go_or_grow(death=0.2, objective="max-entropy"):
    return sl.MeanField(PAYOFF, hexagonal, division=[1.0, 0.0], death=[death, death],
                        objective=objective)


def neighbourhood(neighbours=6, death=0.2):
    """A model builder: the neighbourhood size becomes a scan parameter."""
    return sl.MeanField(PAYOFF, functools.partial(sl.occupancy, neighbours), division=[1.0, 0.0],
                        death=[death, death], objective="max-entropy")


@pytest.fixture(scope="module")
def cluster():
    from distributed import LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                      dashboard_address=":0") as local:
        yield local


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


# --------------------------------------------------------------------------- determinism
def test_same_seed_gives_identical_datasets_on_every_executor(cluster, tmp_path):
    from distributed import Client

    reference = sa.scan(noisy, GRID, seed=42, replicates=2, progress=False)
    assert reference["value"].dims == ("beta", "n", "replicate")
    assert reference["draws"].dims == ("beta", "n", "replicate", "draws_dim_0")
    assert reference["heads"].dtype == bool and reference["label"].dtype.kind == "U"
    scheduler_file = tmp_path / "scheduler.json"
    scheduler_file.write_text(json.dumps({"address": cluster.scheduler_address}))
    with Client(cluster, set_as_default=False) as client:
        runs = {
            "serial, batches of 5": dict(executor="serial", batch_size=5),
            "2 processes": dict(executor="processes", jobs=2, batch_size=3),
            "Dask Client": dict(executor=client),
            "Dask Client, batches of 1": dict(executor=client, batch_size=1),
            "Dask cluster": dict(executor=cluster),
            "scheduler address": dict(executor=cluster.scheduler_address),
            "scheduler file": dict(executor=str(scheduler_file)),
        }
        for name, options in runs.items():
            other = sa.scan(noisy, GRID, seed=42, replicates=2, progress=False, **options)
            try:
                xr.testing.assert_identical(other, reference)
            except AssertionError as exc:
                raise AssertionError(f"{name} differs from serial") from exc
        assert client.status == "running"  # a Client given by the caller is left open
    different = sa.scan(noisy, GRID, seed=43, replicates=2, progress=False)
    assert not np.array_equal(different["value"].values, reference["value"].values)


def test_seeds_are_numpy_spawned_children_keyed_by_index():
    # numpy's SeedSequence.spawn gives child i the spawn key (i,) and grandchild (i, r) the key
    # (i, r) (numpy documentation, "Parallel random number generation").
    ds = sa.scan(noisy, GRID, seed=7, replicates=2, progress=False)
    children = np.random.SeedSequence(7).spawn(12)
    flat = ds["seed"].values.reshape(12, 2)
    for i, child in enumerate(children):
        for r, grandchild in enumerate(child.spawn(2)):
            expected = int(grandchild.generate_state(1, np.uint64)[0] >> np.uint64(1))
            assert flat[i, r] == expected
    # The stored seed rebuilds the generator the point used.
    beta, n, r = 2.0, 3, 1
    seed = int(ds["seed"].sel(beta=beta, n=n, replicate=r))
    again = noisy({"beta": beta, "n": n}, np.random.default_rng(seed))
    assert again["value"] == ds["value"].sel(beta=beta, n=n, replicate=r)
    assert ds.attrs["root_seed"] == 7 and ds.attrs["design"] == "grid"


def test_jax_in_worker_processes_runs_in_float64(monkeypatch):
    # Worker processes start without the client's JAX setting; the scan must switch them.
    monkeypatch.delenv("JAX_ENABLE_X64", raising=False)
    from distributed import LocalCluster

    grid = {"x": np.array([1.0, 2.0])}
    local = sa.scan(jax_precision, grid, executor="processes", jobs=1, progress=False)
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True,
                      dashboard_address=":0") as remote:
        distributed = sa.scan(jax_precision, grid, executor=remote, progress=False)
    for ds in (local, distributed):
        assert ds["bits"].values.tolist() == [64, 64]
        # float32 would round 1 + 1e-10 to 1 (machine epsilon 1.2e-7).
        assert ds["tiny"].values == pytest.approx(1e-10, rel=1e-5)


# ------------------------------------------------------------------------- checkpoints
KILLED_SCRIPT = """
import sys, time
import numpy as np
from switchlaw.analysis import scan, save_scan

log, checkpoint, out, delay = sys.argv[1], sys.argv[2], sys.argv[3], float(sys.argv[4])

def point(p, rng):
    with open(log, "a") as stream:
        stream.write(f"{p['i']}\\n")
    time.sleep(delay)
    return {"value": 0.5 * p["i"] + rng.normal(), "draws": rng.random(2), "odd": p["i"] % 2 == 1}

ds = scan(point, {"i": np.arange(60)}, seed=11, checkpoint=checkpoint, batch_size=4, progress=False)
save_scan(ds, out)
"""


def run_script(*args, wait=True):
    command = [sys.executable, "-c", KILLED_SCRIPT, *map(str, args)]
    if wait:
        subprocess.run(command, check=True, timeout=120)
        return None
    return subprocess.Popen(command)


def finished_items(checkpoint) -> set:
    found = set()
    for name in os.listdir(checkpoint):
        if name.startswith("batch-"):
            with np.load(os.path.join(checkpoint, name)) as data:
                found.update(int(i) for i in data["items"])
    return found


def test_killed_scan_resumes_computing_only_what_is_missing(tmp_path):
    log, checkpoint = tmp_path / "calls.log", tmp_path / "checkpoint"
    # 1. A real run, killed (SIGKILL: no clean-up) once a few batches are on disk.
    process = run_script(log, checkpoint, tmp_path / "never.nc", 0.05, wait=False)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and process.poll() is None:
        if checkpoint.is_dir() and sum(n.startswith("batch-") for n in os.listdir(checkpoint)) >= 3:
            break
        time.sleep(0.02)
    os.kill(process.pid, signal.SIGKILL)
    process.wait()
    assert process.returncode == -signal.SIGKILL
    assert not (tmp_path / "never.nc").exists()
    done = finished_items(checkpoint)
    assert 0 < len(done) < 60
    # 2. Resume: exactly the items not on disk are computed, once each.
    log.unlink()
    run_script(log, checkpoint, tmp_path / "resumed.nc", 0.0)
    computed = [int(line) for line in log.read_text(encoding="utf-8").split()]
    assert sorted(computed) == sorted(set(range(60)) - done)
    # 3. The result equals an uninterrupted run exactly.
    run_script(tmp_path / "other.log", tmp_path / "fresh", tmp_path / "uninterrupted.nc", 0.0)
    xr.testing.assert_identical(sa.load_scan(tmp_path / "resumed.nc"),
                                sa.load_scan(tmp_path / "uninterrupted.nc"))


def test_finished_checkpoint_reruns_without_computing(tmp_path):
    CALLS.clear()
    grid = {"x": np.arange(6.0)}
    first = sa.scan(counted, grid, checkpoint=tmp_path / "c", progress=False)
    assert sorted(CALLS) == list(range(6))
    again = sa.scan(counted, grid, checkpoint=tmp_path / "c", progress=False)
    assert len(CALLS) == 6
    xr.testing.assert_identical(first, again)


def test_checkpoint_of_a_different_scan_is_refused_and_left_alone(tmp_path):
    path = tmp_path / "c"
    sa.scan(counted, {"x": np.arange(4.0)}, seed=0, checkpoint=path, study="go-or-grow", progress=False)
    before = {n: os.path.getmtime(path / n) for n in os.listdir(path)}
    cases = [
        (dict(grid={"x": np.arange(4.0)}, seed=1), r"belongs to a different scan.*seed is 0 there, 1 now"),
        (dict(grid={"x": np.arange(5.0)}, seed=0), r"values of 'x' differ \(4 values 0\.0\.\.3\.0 there, 5 values 0\.0\.\.4\.0 now\)"),
        (dict(grid={"y": np.arange(4.0)}, seed=0), r"parameters are \['x'\] there, \['y'\] now"),
    ]
    for case, pattern in cases:
        with pytest.raises(sl.InputError, match=pattern):
            sa.scan(counted, case["grid"], seed=case["seed"], checkpoint=path, study="go-or-grow",
                    progress=False)
    with pytest.raises(sl.InputError, match=r"study is 'go-or-grow' there, 'move-or-rest' now"):
        sa.scan(counted, {"x": np.arange(4.0)}, checkpoint=path, study="move-or-rest", progress=False)
    with pytest.raises(sl.InputError, match=r"function is 'test_scan\.counted' there, 'test_scan\.noisy' now"):
        sa.scan(noisy, {"x": np.arange(4.0)}, checkpoint=path, study="go-or-grow", progress=False)
    assert {n: os.path.getmtime(path / n) for n in os.listdir(path)} == before
    stranger = tmp_path / "stranger"
    stranger.mkdir()
    (stranger / "notes.txt").write_text("mine")
    with pytest.raises(sl.InputError, match="non-empty directory without manifest.json"):
        sa.scan(counted, {"x": np.arange(4.0)}, checkpoint=stranger, progress=False)
    assert os.listdir(stranger) == ["notes.txt"]


# ---------------------------------------------------------------------------- netCDF
def test_netcdf_round_trip_is_identical(tmp_path):
    grid_scan = sa.scan(noisy, GRID, seed=3, replicates=2, study="demo", progress=False)
    design = sa.latin_hypercube({"beta": (0.1, 5.0), "n": (1.0, 3.0)}, 7, seed=2)
    design_scan = sa.scan(noisy, design, seed=3, progress=False)
    law_scan = sa.scan(sa.LawSummary(go_or_grow(), densities=[0.1, 0.5]), {"beta": [1.0, 2.0]},
                       progress=False)
    for name, ds in {"grid": grid_scan, "design": design_scan, "law": law_scan}.items():
        path = tmp_path / f"{name}.nc"
        sa.save_scan(ds, path)
        back = sa.load_scan(path)
        xr.testing.assert_identical(back, ds)
        assert back["seed"].dtype == np.int64
    assert sa.load_scan(tmp_path / "grid.nc")["heads"].dtype == bool
    assert sa.load_scan(tmp_path / "law.nc")["phenotype"].values.tolist() == ["divide", "move"]
    with pytest.raises(sl.InputError, match="exists; pass overwrite=True"):
        sa.save_scan(grid_scan, tmp_path / "grid.nc")
    sa.save_scan(design_scan, tmp_path / "grid.nc", overwrite=True)
    xr.testing.assert_identical(sa.load_scan(tmp_path / "grid.nc"), design_scan)
    assert sorted(os.listdir(tmp_path)) == ["design.nc", "grid.nc", "law.nc"]  # no temporaries


# -------------------------------------------------------------------------- progress
def test_progress_bar_estimates_time_left_and_quiet_mode_prints_nothing(capsys):
    sa.scan(counted, {"x": np.arange(12.0)}, progress=True)
    out, err = capsys.readouterr()
    assert out == ""
    assert re.search(r"about \d+:\d\d left", err)
    assert "12/12 (100%)" in err
    sa.scan(counted, {"x": np.arange(12.0)}, progress=False)
    assert capsys.readouterr() == ("", "")


# ---------------------------------------------------------------- point functions
def test_law_summary_matches_the_logistic_law_over_neighbourhood_sizes():
    # Max-entropy with two phenotypes is the logistic law q = 1 / (1 + exp(-beta du(y)))
    # (maximum entropy, Jaynes 1957); the fraction averages it over Binomial(N, rho)
    # neighbour counts (mean-field occupancy, common practice, no source), and E[u] and I(X;Y) follow from their definitions
    # (Cover & Thomas ch. 2), written out here with scipy.
    densities = np.array([0.1, 0.4, 0.8])
    grid = {"beta": np.array([0.5, 3.0]), "neighbours": np.array([4, 6, 8])}
    ds = sa.scan(sa.LawSummary(neighbourhood, densities=densities), grid, progress=False)
    assert ds["fraction"].dims == ("beta", "neighbours", "density", "phenotype")
    assert ds["information"].attrs["units"] == "bit"
    assert ds["beta"].attrs["units"] == "nats per payoff unit"
    for beta in grid["beta"]:
        for n in grid["neighbours"]:
            k = np.arange(n + 1)
            u = np.column_stack([k / 6, 1 - k / 6])
            q_divide = expit(beta * (u[:, 0] - u[:, 1]))
            q = np.column_stack([q_divide, 1 - q_divide])
            for j, rho in enumerate(densities):
                p = binom.pmf(k, n, rho)
                r = p @ q
                cell = dict(beta=beta, neighbours=n, density=rho)
                assert ds["fraction"].sel(**cell).values == pytest.approx(r, abs=1e-12)
                assert float(ds["expected_payoff"].sel(**cell)) == pytest.approx(
                    float(np.sum(p[:, None] * q * u)), abs=1e-12)
                bits = np.sum(p[:, None] * rel_entr(q, r[None, :])) / math.log(2)
                assert float(ds["information"].sel(**cell)) == pytest.approx(bits, abs=1e-10)


def test_regime_and_critical_betas_match_the_transcritical_closed_form():
    # At zero density every neighbour site is empty, so q(divide | 0) = 1 / (1 + e^beta) and
    # the low-density growth is g(0) = q b - s d, zero at beta_T = ln(b / (s d) - 1) (derived
    # from the Kuhn–Tucker conditions (Blahut 1972) and the fast-switching growth rate). Zero is stable above beta_T (strong Allee or extinction)
    # and unstable below (monostable or weak Allee) — the regime definitions of §4.
    model = go_or_grow(death=0.2)
    grid = {"beta": np.array([0.4, 1.0, 2.5, 6.0]), "death_scale": np.array([0.8, 1.0, 1.25])}
    regimes = sa.scan(sa.RegimeSummary(model), grid, progress=False)
    critical = sa.scan(sa.CriticalBetas(model, beta_min=0.05, beta_max=8.0),
                       {"death_scale": grid["death_scale"]}, progress=False)
    for s in grid["death_scale"]:
        beta_t = math.log(1.0 / (0.2 * s) - 1.0)
        assert float(critical["transcritical_beta"].sel(death_scale=s)) == pytest.approx(beta_t, abs=1e-9)
        for beta in grid["beta"]:
            cell = regimes.sel(beta=beta, death_scale=s)
            g0 = 1.0 / (1.0 + math.exp(beta)) - 0.2 * s
            assert float(cell["low_density_growth"]) == pytest.approx(g0, abs=1e-12)
            expected = {"strong-allee", "extinction"} if beta > beta_t else {"monostable", "weak-allee"}
            assert str(cell["regime"].values) in expected
            threshold = float(cell["allee_threshold"])
            assert (str(cell["regime"].values) == "strong-allee") == (not math.isnan(threshold))
    assert "strong-allee" in regimes["regime"].values


def test_extinction_risk_matches_first_step_analysis():
    # Birth–death chain: P(hit 0 before K | n0) = sum_{j=n0}^{K-1} rho_j / sum_{j=0}^{K-1} rho_j
    # with rho_j = prod_{i<=j} mu_i / lambda_i (Karlin & Taylor 1975, ch. 4). Rates from the
    # Fast-switching mean field (common practice, no source): births b_x (1 - rho), deaths d_x, weighted by the law's fractions.
    model = go_or_grow(death=0.2)
    sites, initial, target, replicates = 40, 3, 12, 400
    point_function = sa.ExtinctionRisk(model, sites=sites, initial=initial, target=target)
    grid = {"beta": np.array([0.5, 2.0])}
    ds = sa.scan(point_function, grid, replicates=replicates, seed=5, progress=False)
    assert ds["extinct"].dims == ("beta", "replicate") and ds["extinct"].dtype == bool
    for beta in grid["beta"]:
        ratios = [1.0]
        for n in range(1, target):
            f = model.fractions(n / sites, beta)
            birth = f @ np.array([1.0, 0.0]) * (1 - n / sites)
            death = 0.2
            ratios.append(ratios[-1] * death / birth)
        exact = sum(ratios[initial:target]) / sum(ratios[:target])
        estimate = float(ds["extinct"].sel(beta=beta).mean())
        # Binomial standard error of a fraction from 400 runs; 4 of them (common practice).
        assert abs(estimate - exact) < 4 * math.sqrt(exact * (1 - exact) / replicates)


# ------------------------------------------------------------------------------ designs
def test_space_filling_designs_have_their_stratification_properties():
    # Latin hypercube: one point in each of the n equal strata of every axis (McKay, Beckman
    # & Conover 1979). Scrambled Sobol' points, n = 2^m: each one-dimensional projection is a
    # (0, m, 1)-net, again one point per stratum (Sobol' 1967; Owen 1998).
    bounds = {"beta": (0.5, 8.0), "death_scale": (0.5, 1.5)}
    for design in (sa.latin_hypercube(bounds, 24, seed=3), sa.sobol_points(bounds, 32, seed=3)):
        n = len(design)
        for j, (low, high) in enumerate(bounds.values()):
            strata = np.floor((design.values[:, j] - low) / (high - low) * n).astype(int)
            assert sorted(strata.tolist()) == list(range(n))
    first = sa.sobol_points(bounds, 8, seed=1)
    assert np.array_equal(first.values, sa.sobol_points(bounds, 8, seed=1).values)
    assert not np.array_equal(first.values, sa.sobol_points(bounds, 8, seed=2).values)
    ds = sa.scan(noisy, sa.latin_hypercube({"beta": (0.5, 4.0), "n": (1.0, 3.0)}, 5, seed=0),
                 progress=False)
    assert ds["value"].dims == ("point",) and ds["beta"].dims == ("point",)
    assert ds.attrs["design"] == "latin-hypercube"


# ---------------------------------------------------------------------------- bad input
def test_unreachable_scheduler_is_a_clear_error_without_a_hang(tmp_path):
    address = f"tcp://127.0.0.1:{free_port()}"
    start = time.monotonic()
    with pytest.raises(sl.InputError, match=rf"no Dask scheduler answered at '{address}' within 5 s"):
        sa.scan(counted, {"x": [1.0]}, executor=address, checkpoint=tmp_path / "c", progress=False)
    assert time.monotonic() - start < 10
    assert not (tmp_path / "c").exists()  # nothing written


@pytest.mark.parametrize(
    "call, pattern",
    [
        (lambda: sa.scan(counted, {}), r"`grid` must name at least one parameter \(got an empty mapping\)"),
        (lambda: sa.scan(counted, {"x": []}), r"`grid\['x'\]` must not be empty"),
        (lambda: sa.scan(counted, {"x": [[1.0, 2.0]]}), r"`grid\['x'\]` must be a 1-D array \(got shape \(1, 2\)\)"),
        (lambda: sa.scan(counted, {"x": [1.0, 1.0]}), r"`grid\['x'\]` must not repeat a value"),
        (lambda: sa.scan(counted, {"seed": [1.0]}), r"name 'seed' is reserved"),
        (lambda: sa.scan(counted, [1.0, 2.0]), r"`grid` must map parameter names to 1-D arrays, or be a Design \(got list\)"),
        (lambda: sa.scan(counted, {"x": [1.0]}, executor="threads"), r"`executor` must be 'serial', 'processes', a Dask Client"),
        (lambda: sa.scan(counted, {"x": [1.0]}, executor="missing.json"), r"scheduler file 'missing.json' does not exist"),
        (lambda: sa.scan(counted, {"x": [1.0]}, jobs=2), r"`jobs` applies to executor='processes' only"),
        (lambda: sa.scan(counted, {"x": [1.0]}, seed=-1), r"`seed` must be an integer in \[0, 2\*\*63\) \(got -1\)"),
        (lambda: sa.scan(counted, {"x": [1.0]}, batch_size=0), r"`batch_size` must be a positive integer"),
        (lambda: sa.scan(42, {"x": [1.0]}), r"`function` must be callable"),
        (lambda: sa.scan(changing_shape, {"x": [1.0, 2.0]}, progress=False), r"output 'v' must have the same shape and kind at every point; item 1 \({'x': 2\.0}\) gave f\(2,\), item 0 gave f\(1,\)"),
        (lambda: sa.scan(sa.LawSummary(go_or_grow(), densities=[0.5]), {"beta": [1.0], "deaht_scale": [1.0]}),
         r"`grid` names 'deaht_scale', which the model family does not have \(its parameters: beta, cost_per_bit, death_scale, division_scale, tau\)"),
        (lambda: sa.scan(sa.RegimeSummary(neighbourhood), {"beta": [1.0], "neighbors": [4]}),
         r"`grid` names 'neighbors', which the model family does not have \(its parameters: beta, cost_per_bit, neighbours, death, death_scale"),
        (lambda: sa.scan(sa.RegimeSummary(go_or_grow()), {"death_scale": [1.0]}), r"give exactly one of 'beta', 'cost_per_bit'"),
        (lambda: sa.scan(sa.CriticalBetas(go_or_grow(), beta_min=0.1, beta_max=2.0), {"beta": [1.0]}), r"sets 'beta' itself"),
        (lambda: sa.sobol_points({"beta": (0.1, 2.0)}, 100), r"`n` must be a power of 2 .* \(got 100; nearest 64 or 128\)"),
        (lambda: sa.latin_hypercube({"beta": (2.0, 0.1)}, 10), r"`bounds\['beta'\]` must be \(low, high\) with low < high"),
    ],
)
def test_bad_input_messages(call, pattern):
    with pytest.raises(sl.InputError, match=pattern):
        call()


def test_errors_inside_the_function_name_the_point():
    with pytest.raises(ZeroDivisionError, match="three is not allowed") as caught:
        sa.scan(fails_at_three, {"x": np.arange(5.0)}, progress=False)
    assert "at item 3, point {'x': 3.0}" in "\n".join(caught.value.__notes__)


def test_dask_executor_without_distributed_is_a_one_line_error(monkeypatch):
    # dask.distributed is an optional dependency (`switchlaw[dask]`): without it, naming a
    # scheduler is an InputError that says what to install (common practice, no source).
    from switchlaw.analysis._dask import DaskExecutor
    from switchlaw.analysis._targets import Target

    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed -> ImportError
    with pytest.raises(sl.InputError, match=r"switchlaw\[dask\]"):
        DaskExecutor.connect(Target("address", "tcp://127.0.0.1:1"), abs)
