"""The scan driver: split the missing items into batches, run them, checkpoint, assemble.

Batches are sized as the scan goes: the first is one item; later ones hold about
:data:`TARGET_SECONDS` of work, judged from the batches already finished, so that Dask's
per-task overhead (milliseconds) stays small, but never more than a share of what is left, so
that the last batches spread over every worker. Which items share a batch never changes the
result: each item's generator comes from its own seed.
"""

from __future__ import annotations

import functools
import inspect
import math
from collections import deque

import numpy as np

from .._errors import InputError
from ._assemble import assemble
from ._batch import Task, check_alike
from ._checkpoint import Checkpoint, Memory
from ._executors import open_executor, resolve
from ._grid import make_plan
from ._progress import Progress
from ._quantity import as_labels
from ._seeds import root_seed

#: Seconds of work aimed at per batch (at least about half a second).
TARGET_SECONDS = 1.0


def function_name(function) -> str:
    """``module.qualname`` of a function, or of a callable object's class."""
    while isinstance(function, functools.partial):
        function = function.func
    if not (inspect.isfunction(function) or inspect.ismethod(function) or inspect.isbuiltin(function)):
        function = type(function)
    return f"{function.__module__}.{function.__qualname__}"


def _batch_size(value) -> int | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
        raise InputError(f"`batch_size` must be a positive integer or None (got {value!r})")
    return int(value)


def _auto_size(per_item: list, remaining: int, workers: int) -> int:
    if not per_item:
        return 1
    seconds = float(np.median(per_item[-3:]))
    size = math.ceil(TARGET_SECONDS / max(seconds, 1e-6))
    share = math.ceil(remaining / (2 * workers))
    return max(1, min(size, share))


def _drive(runner, plan, root, missing, store, fixed, bar) -> None:
    queue = deque(missing)
    pending = set()
    per_item: list = []
    try:
        while queue or pending:
            while queue and len(pending) < runner.slots:
                size = fixed or _auto_size(per_item, len(queue), runner.workers)
                items = [queue.popleft() for _ in range(min(size, len(queue)))]
                task = Task(np.array(items, dtype=np.int64), tuple(plan.point(k) for k in items),
                            root, plan.replicates)
                pending.add(runner.submit(task))
            done, pending = runner.wait(pending)
            for handle in done:
                batch = runner.result(handle)
                reference = store.batches[0] if store.batches else batch
                check_alike(reference, batch, plan.point(int(batch.items[0])))
                store.add(batch)
                per_item.append(batch.seconds / batch.items.size)
                bar.advance(batch.items.size)
    except BaseException:
        runner.close(pending)
        raise
    runner.close()


def scan(
    function,
    grid,
    *,
    executor="serial",
    seed=0,
    checkpoint=None,
    batch_size=None,
    jobs=None,
    replicates=None,
    labels=None,
    study=None,
    progress=True,
):
    """Evaluate ``function`` at every point of a grid or design; results as a labelled Dataset.

    Parameters
    ----------
    function : callable
        ``function(point, rng) -> dict``: ``point`` maps parameter names to values (plain
        Python scalars), ``rng`` is the point's own ``numpy.random.Generator``; the dict holds
        scalars or arrays (numbers, booleans or text), the same keys and shapes at every point.
        It must depend on nothing but its arguments (no state kept between calls), and, for
        ``"processes"`` and Dask, be picklable: define it at module top level.
    grid : mapping or Design
        ``name -> 1-D array`` (full factorial, in key order), or a :class:`Design` (a list of
        points: Latin hypercube, Sobol', Saltelli).
    executor : str, Client or cluster
        ``"serial"``; ``"processes"`` (local processes started by spawn, ``jobs`` of them);
        a Dask ``distributed.Client`` or cluster; a scheduler address (``"tcp://host:8786"``)
        or the path of a scheduler file.
    seed : int
        Root seed in ``[0, 2**63)``. Item ``k`` (point ``i``, replicate ``r``) draws from
        ``SeedSequence(seed, spawn_key=(i,))`` — ``(i, r)`` with replicates — so the same seed
        gives the same Dataset whatever the executor, the number of workers or the batches.
    checkpoint : path, optional
        Directory where finished batches are kept; a rerun after an interruption computes
        only the missing items. A checkpoint of a different scan is refused.
    batch_size : int, optional
        Items per task; by default chosen from the measured time per item so that a task runs
        for about a second.
    jobs : int, optional
        Processes for ``executor="processes"`` (default: the cores this process may use).
    replicates : int, optional
        Independent runs per point, each with its own seed (a ``replicate`` dimension).
    labels : mapping, optional
        ``name -> Quantity`` (or a mapping of its fields): long names, units, and the dimension
        names and coordinates of array outputs. Known parameters (beta, cost_per_bit, ...) are
        labelled already, and point functions such as :class:`LawSummary` label their outputs.
    study : str, optional
        A name for what is being scanned; stored in the Dataset and the checkpoint, whose
        reuse it guards (two scans of the same function on different models should differ).
    progress : bool
        Progress bar on stderr with the time left; ``False`` for quiet logs.

    Returns
    -------
    xarray.Dataset
        One variable per output (grid dimensions first, then ``replicate``, then the output's
        own dimensions), ``seed`` per item, and attributes ``root_seed``, ``design``,
        ``function`` and ``study``.

    Examples
    --------
    >>> import numpy as np
    >>> def noisy_square(point, rng):
    ...     return {"square": point["x"] ** 2, "noise": rng.normal()}
    >>> ds = scan(noisy_square, {"x": np.array([1.0, 2.0, 3.0])}, seed=5, progress=False)
    >>> ds["square"].values.tolist()
    [1.0, 4.0, 9.0]
    >>> again = np.random.default_rng(int(ds["seed"][1])).normal()
    >>> bool(again == ds["noise"][1])
    True
    """
    if not callable(function):
        raise InputError(f"`function` must be callable as function(point, rng) (got {type(function).__name__})")
    plan = make_plan(grid, replicates)
    root = root_seed(seed)
    check = getattr(function, "check_parameters", None)
    if callable(check):
        check(plan.names)
    merged = dict(getattr(function, "scan_labels", None) or {})
    merged.update(as_labels(labels))
    fixed = _batch_size(batch_size)
    target = resolve(executor, jobs)
    if study is not None and not isinstance(study, str):
        raise InputError(f"`study` must be a string or None (got {type(study).__name__})")
    if not isinstance(progress, bool):
        raise InputError(f"`progress` must be True or False (got {progress!r})")
    fingerprint = {"function": function_name(function), "seed": root, "study": study,
                   **plan.fingerprint()}
    store = Memory() if checkpoint is None else Checkpoint(checkpoint, fingerprint, plan.items)
    done = store.done()
    missing = [k for k in range(plan.items) if k not in done]
    bar = Progress(plan.items, plan.items - len(missing), enabled=progress)
    try:
        if missing:
            runner = open_executor(target, function)
            try:
                store.prepare()
            except BaseException:
                runner.close()
                raise
            _drive(runner, plan, root, missing, store, fixed, bar)
    finally:
        bar.close()
    from .. import __version__

    attrs = {"root_seed": root, "design": plan.kind, "function": fingerprint["function"],
             "software": f"switchlaw {__version__}"}
    if plan.base_samples:
        attrs["base_samples"] = plan.base_samples
    if plan.replicates:
        attrs["replicates"] = plan.replicates
    if study is not None:
        attrs["study"] = study
    return assemble(plan, store.batches, merged, attrs)
