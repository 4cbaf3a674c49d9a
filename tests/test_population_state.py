"""The mean-field model holds no hidden state: immutable, picklable, safe to share between
threads, explicit law cache (issue 17 §4), and rates over a vector of densities."""

import dataclasses
import functools
import multiprocessing
import pickle
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor

import numpy as np
import pytest
from scipy.stats import binom

import switchlaw as sl

# Invented go-or-grow scenario (as in test_population.py).
GROW_WHEN_CROWDED = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}
MOVE_FROM_CROWDING = {"divide": sl.Linear(-1 / 6, 1.0), "move": sl.Linear(1 / 6, 0.0)}
HEXAGONAL = functools.partial(sl.occupancy, 6)  # picklable, unlike a lambda


def model(payoff=GROW_WHEN_CROWDED, death=0.2, tau=None, objective="max-entropy"):
    return sl.MeanField(payoff, HEXAGONAL, division=[1.0, 0.0], death=[death, death],
                        objective=objective, tau=tau)


def divide_fraction(payoff, rho, beta):
    """Max-entropy law q(divide | k) = 1 / (1 + exp(beta (u_move - u_divide))) (Jaynes 1957)
    averaged over k ~ Binomial(6, rho) occupied neighbours: written out with scipy.stats."""
    k = np.arange(7)
    u_divide, u_move = payoff["divide"].slope * k + payoff["divide"].intercept, \
        payoff["move"].slope * k + payoff["move"].intercept
    q = 1.0 / (1.0 + np.exp(beta * (u_move - u_divide)))
    return binom.pmf(k[None, :], 6, np.atleast_1d(rho)[:, None]) @ q


def transcritical(b, d):
    # At zero density every neighbour site is empty (k = 0): q(divide | 0) = 1 / (1 + e^beta)
    # and g(0) = q b - d vanishes at beta = ln(b / d - 1) (closed form, as in test_population).
    return np.log(b / d - 1.0)


def summary(m):
    """Numbers a worker would send back: critical betas and equilibria at two betas."""
    critical = [(c.kind, c.beta) for c in m.critical_betas(0.5, 8.0)]
    equilibria = [[(e.density, e.stable) for e in m.equilibria(beta)] for beta in (2.0, 6.0)]
    return critical, equilibria


def test_model_is_immutable_and_its_rates_are_read_only():
    m = model()
    with pytest.raises(dataclasses.FrozenInstanceError):
        m.death = np.array([0.3, 0.3])
    with pytest.raises(ValueError):
        m.death[0] = 0.3
    copy = pickle.loads(pickle.dumps(m))
    assert not copy.death.flags.writeable
    assert np.array_equal(copy.death, m.death) and copy.tau is None


def test_a_model_pickled_to_another_process_gives_identical_results():
    m = model(tau=0.5)
    here = summary(m)
    with ProcessPoolExecutor(1, mp_context=multiprocessing.get_context("spawn")) as pool:
        there = pool.submit(summary, m).result(timeout=300)
    assert there == here  # bit for bit: the worker starts from the same immutable model
    # With finite tau the zero state changes stability where det J(0) = 0, i.e. where
    # q / (1 - tau (b - d)) + (1 - q) / (1 + tau d) = 1: q(divide | 0) = d (1 - tau (b - d)) / b
    # (matrix determinant lemma on J(0) = diag(a - 1/tau) + f 1^T / tau; derived by hand).
    q = 0.2 * (1.0 - 0.5 * (1.0 - 0.2)) / 1.0
    assert here[0][0][0] == "transcritical"
    assert here[0][0][1] == pytest.approx(np.log(1.0 / q - 1.0), rel=1e-9)


def test_two_threads_using_one_model_give_identical_results():
    m = model()
    serial = summary(m)
    with ThreadPoolExecutor(2) as pool:
        results = list(pool.map(lambda _: summary(m), range(4)))
    assert all(r == serial for r in results)
    assert serial[0][0][1] == pytest.approx(transcritical(1.0, 0.2), rel=1e-9)
    # One explicit cache shared by threads: the same numbers (max-entropy laws are closed form,
    # so no warm start is involved).
    cache = sl.LawCache()
    with ThreadPoolExecutor(2) as pool:
        shared = list(pool.map(lambda beta: m.equilibria(beta, cache=cache), [2.0, 6.0, 2.0, 6.0]))
    fresh = [m.equilibria(beta) for beta in (2.0, 6.0, 2.0, 6.0)]
    assert [[e.density for e in s] for s in shared] == [[e.density for e in f] for f in fresh]


def test_a_changed_parameter_never_reuses_a_stale_law():
    cache = sl.LawCache()
    first = model()
    rho = np.linspace(0.0, 1.0, 11)
    assert first.fractions(rho, 3.0, cache=cache)[:, 0] == pytest.approx(
        divide_fraction(GROW_WHEN_CROWDED, rho, 3.0), abs=1e-14)
    other = dataclasses.replace(first, payoff=MOVE_FROM_CROWDING)
    assert other.fractions(rho, 3.0, cache=cache)[:, 0] == pytest.approx(
        divide_fraction(MOVE_FROM_CROWDING, rho, 3.0), abs=1e-14)
    # Rates do not enter the law: a changed death rate reuses the derived fractions (nothing new
    # kept), and its transcritical point moves to the closed form for the new rate.
    kept = len(cache)
    harsher = dataclasses.replace(first, death=[0.3, 0.3])
    assert harsher.fractions(rho, 3.0, cache=cache)[:, 0] == pytest.approx(
        divide_fraction(GROW_WHEN_CROWDED, rho, 3.0), abs=1e-14)
    assert len(cache) == kept
    found = harsher.critical_betas(0.1, 5.0, cache=cache)
    assert found[0].beta == pytest.approx(transcritical(1.0, 0.3), rel=1e-9)
    assert first.critical_betas(0.1, 5.0, cache=cache)[0].beta == pytest.approx(transcritical(1.0, 0.2), rel=1e-9)
    # Bad values are still refused when replacing.
    with pytest.raises(sl.InputError, match="death"):
        dataclasses.replace(first, death=[-0.1, 0.2])
    with pytest.raises(sl.InputError, match="cache"):
        first.fractions(0.5, 1.0, cache={})


@pytest.mark.parametrize("tau", [None, 0.7])
def test_rates_take_a_vector_of_densities(tau):
    m = model(tau=tau)
    rho = np.linspace(0.0, 1.0, 9)
    f = m.fractions(rho, 2.5)
    assert f.shape == (9, 2)
    assert f[:, 0] == pytest.approx(divide_fraction(GROW_WHEN_CROWDED, rho, 2.5), abs=1e-14)
    a = m.net_rates(rho)
    # a_x = b_x (1 - rho) - d_x (the model's definition, written out).
    assert a == pytest.approx(np.column_stack([1.0 - rho - 0.2, np.full(9, -0.2)]), abs=1e-15)
    if tau is None:
        expected = (f * a).sum(axis=1)
    else:
        expected = (f / (1.0 - tau * a)).sum(axis=1) - 1.0
    assert m.reduced(rho, 2.5) == pytest.approx(expected, rel=1e-13, abs=1e-15)
    assert [m.reduced(r, 2.5) for r in rho] == pytest.approx(list(expected), rel=1e-13, abs=1e-15)
    with pytest.raises(sl.InputError, match="density"):
        m.fractions(np.array([0.5, 1.5]), 1.0)


def test_continuation_reports_progress_up_to_done():
    # A progress line with the time left needs (done, total) that rise to done == total.
    seen = []
    found = model().critical_betas(0.5, 8.0, samples=11, on_progress=lambda d, t: seen.append((d, t)))
    assert seen[-1][0] == seen[-1][1] and all(d <= t for d, t in seen)
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)
    assert found[0].beta == pytest.approx(transcritical(1.0, 0.2), rel=1e-9)
