"""Where scan batches run: in this process, in spawned local processes, or on Dask.

Every executor offers the same four calls — ``submit(task)``, ``wait(handles)`` (block until
at least one is done), ``result(handle)`` and ``close(pending)`` — plus ``workers``, the
number of batches it runs at once, and ``slots``, how many it keeps submitted.
:func:`resolve` checks the form of the ``executor=`` argument without connecting;
:func:`open_executor` starts or connects the executor it names.
"""

from __future__ import annotations

import itertools
import os
import re

from .._errors import InputError
from ._batch import install, run_batch, run_installed
from ._targets import Target, function_bytes

#: Executor names accepted as strings.
NAMES = ("serial", "processes")
_ADDRESS = re.compile(r"^[\w.\-\[\]:]+:\d+$")


def _jobs(jobs, kind: str) -> int:
    if kind != "processes":
        if jobs is not None:
            raise InputError(f"`jobs` applies to executor='processes' only (got jobs={jobs!r} with {kind!r})")
        return 1
    if jobs is None:  # the cores this process may use, not every core of the machine
        return len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise InputError(f"`jobs` must be a positive integer (got {jobs!r})")
    return jobs


def resolve(executor, jobs=None) -> Target:
    """Check the form of ``executor`` without connecting to anything."""
    if isinstance(executor, os.PathLike):
        executor = os.fspath(executor)
        if not os.path.isfile(executor):
            raise InputError(f"`executor`: Dask scheduler file {executor!r} does not exist")
        return Target("scheduler-file", executor, _jobs(jobs, "scheduler-file"))
    if isinstance(executor, str):
        if executor in NAMES:
            return Target(executor, None, _jobs(jobs, executor))
        if "://" in executor or _ADDRESS.match(executor):
            return Target("address", executor, _jobs(jobs, "address"))
        if os.path.isfile(executor) or executor.endswith(".json"):
            if not os.path.isfile(executor):
                raise InputError(f"`executor`: Dask scheduler file {executor!r} does not exist")
            return Target("scheduler-file", executor, _jobs(jobs, "scheduler-file"))
        raise InputError(
            "`executor` must be 'serial', 'processes', a Dask Client or cluster, a scheduler "
            f"address such as 'tcp://host:8786', or a scheduler file (got {executor!r})"
        )
    module = type(executor).__module__ or ""
    if module.split(".")[0] == "distributed":
        from distributed import Client

        if isinstance(executor, Client):
            return Target("client", executor, _jobs(jobs, "client"))
        if hasattr(executor, "scheduler_address"):
            return Target("cluster", executor, _jobs(jobs, "cluster"))
    raise InputError(
        "`executor` must be 'serial', 'processes', a Dask Client or cluster, a scheduler "
        f"address or a scheduler file (got {type(executor).__name__})"
    )


class _Deferred:
    """A batch the serial executor will run when it is waited for."""

    def __init__(self, order: int, task):
        self.order = order
        self.task = task


class Serial:
    """Runs each batch in this process when it is waited for, oldest first."""

    workers = 1
    slots = 1

    def __init__(self, function):
        self.function = function
        self._order = itertools.count()

    def submit(self, task):
        return _Deferred(next(self._order), task)

    def wait(self, handles):
        oldest = min(handles, key=lambda h: h.order)
        return {oldest}, set(handles) - {oldest}

    def result(self, handle):
        return run_batch(self.function, handle.task)

    def close(self, pending=()):
        pass


class Processes:
    """A pool of ``jobs`` spawned processes (spawn, not fork: fork after JAX can deadlock)."""

    def __init__(self, function, jobs: int):
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        self.workers = jobs
        self.slots = 2 * jobs
        self._pool = ProcessPoolExecutor(
            max_workers=jobs, mp_context=multiprocessing.get_context("spawn"),
            initializer=install, initargs=(function_bytes(function),),
        )

    def submit(self, task):
        return self._pool.submit(run_installed, task)

    def wait(self, handles):
        from concurrent.futures import FIRST_COMPLETED, wait

        done, pending = wait(handles, return_when=FIRST_COMPLETED)
        return done, pending

    def result(self, handle):
        return handle.result()

    def close(self, pending=()):
        self._pool.shutdown(wait=True, cancel_futures=True)


def open_executor(target: Target, function):
    """Start (or connect) the executor a :class:`Target` names."""
    if target.kind == "serial":
        return Serial(function)
    if target.kind == "processes":
        return Processes(function, target.jobs)
    from ._dask import DaskExecutor

    return DaskExecutor.connect(target, function)
