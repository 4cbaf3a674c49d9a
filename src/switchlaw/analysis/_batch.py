"""The unit of work a scan sends to a worker: a batch of items, run one after another.

:func:`run_batch` is what every executor runs (in this process, a spawned process or a Dask
worker). It switches JAX to float64 first — worker processes do not inherit the client's
setting — builds each item's generator from its seed, calls the user's function, and stacks
the outputs.
"""

from __future__ import annotations

import os
import pickle
import sys
import time
from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from ._seeds import item_seeds


@dataclass(frozen=True)
class Task:
    """Items to run: their numbers, their points, and how to seed them."""

    items: np.ndarray
    points: tuple
    root: int
    replicates: int | None


@dataclass(frozen=True)
class BatchResult:
    """Stacked outputs of a batch: ``values[j][t]`` is output ``keys[j]`` of item ``items[t]``."""

    items: np.ndarray
    seeds: np.ndarray
    keys: tuple
    values: tuple
    seconds: float


def enable_float64() -> None:
    """JAX in 64-bit floats in this process: now if it is loaded, else when it is imported.

    Like the rest of switchlaw (``_jax.jax_float64``) this is a process-wide setting; it is
    made in every executor, the serial one included, so results do not depend on which runs.
    """
    if "jax" in sys.modules:
        sys.modules["jax"].config.update("jax_enable_x64", True)
    else:
        os.environ["JAX_ENABLE_X64"] = "1"


def _as_output(value, key, item, point) -> np.ndarray:
    array = np.asarray(value)
    if array.dtype.kind == "S":
        array = array.astype(str)
    if array.dtype.kind not in "biufU":
        raise InputError(
            f"`function` must return numbers, booleans, text or arrays of them; output {key!r} "
            f"at item {item} ({point}) has dtype {array.dtype}"
        )
    if array.dtype.kind == "f":
        array = array.astype(np.float64)
    return array


def stack_outputs(outputs: list, items, points) -> tuple[tuple, tuple]:
    """Check every item returned the same keys, kinds and shapes; stack them per key."""
    keys = tuple(outputs[0])
    for out, item, point in zip(outputs, items, points):
        if tuple(out) != keys:
            raise InputError(
                f"`function` must return the same outputs at every point; item {item} ({point}) "
                f"returned {list(out)}, item {items[0]} returned {list(keys)}"
            )
    stacked = []
    for key in keys:
        first = outputs[0][key]
        for out, item, point in zip(outputs, items, points):
            value = out[key]
            if value.shape != first.shape or (value.dtype.kind == "U") != (first.dtype.kind == "U"):
                raise InputError(
                    f"`function` output {key!r} must have the same shape and kind at every point; "
                    f"item {item} ({point}) gave {value.dtype.kind}{value.shape}, item {items[0]} "
                    f"gave {first.dtype.kind}{first.shape}"
                )
        stacked.append(np.stack([out[key] for out in outputs]))
    return keys, tuple(stacked)


def check_alike(first: BatchResult, batch: BatchResult, point) -> None:
    """A batch must have the outputs, shapes and kinds of the first one (``point``: its first)."""
    item, before = int(batch.items[0]), int(first.items[0])
    if batch.keys != first.keys:
        raise InputError(
            f"`function` must return the same outputs at every point; item {item} ({point}) "
            f"returned {list(batch.keys)}, item {before} returned {list(first.keys)}"
        )
    for key, a, b in zip(first.keys, first.values, batch.values):
        if a.shape[1:] != b.shape[1:] or (a.dtype.kind == "U") != (b.dtype.kind == "U"):
            raise InputError(
                f"`function` output {key!r} must have the same shape and kind at every point; "
                f"item {item} ({point}) gave {b.dtype.kind}{b.shape[1:]}, item {before} gave "
                f"{a.dtype.kind}{a.shape[1:]}"
            )


def run_batch(function, task: Task) -> BatchResult:
    """Run every item of ``task``; ``function`` may be pickled bytes (unpickled fresh here)."""
    enable_float64()
    if isinstance(function, bytes):
        function = pickle.loads(function)
    start = time.perf_counter()
    seeds = item_seeds(task.root, task.items, task.replicates)
    outputs = []
    for item, point, seed in zip(task.items, task.points, seeds):
        item = int(item)
        try:
            out = function(dict(point), np.random.default_rng(int(seed)))
        except Exception as exc:
            exc.add_note(f"switchlaw.scan: raised by `function` at item {item}, point {point}")
            raise
        if not isinstance(out, dict) or not out:
            raise InputError(
                f"`function` must return a non-empty dict of outputs; at item {item} ({point}) "
                f"it returned {type(out).__name__}"
            )
        for key in out:
            if not isinstance(key, str) or not key:
                raise InputError(f"`function` output names must be non-empty strings (got {key!r})")
        outputs.append({key: _as_output(value, key, item, point) for key, value in out.items()})
    keys, values = stack_outputs(outputs, [int(i) for i in task.items], task.points)
    return BatchResult(np.asarray(task.items, dtype=np.int64), seeds, keys, values,
                       time.perf_counter() - start)


# A worker process of the "processes" executor receives the pickled function once.
_INSTALLED: bytes | None = None


def install(function_bytes: bytes) -> None:
    """Initializer of a worker process: keep the pickled function, switch JAX to float64."""
    global _INSTALLED
    _INSTALLED = function_bytes
    enable_float64()


def run_installed(task: Task) -> BatchResult:
    """:func:`run_batch` with the function the worker was given at start."""
    return run_batch(_INSTALLED, task)
