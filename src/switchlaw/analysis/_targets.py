"""What an executor runs on and what it sends: shared by the local executors and Dask.

Kept apart from :mod:`._executors` so that :mod:`._dask` needs nothing from it (no import
cycle between the two).
"""

from __future__ import annotations

from dataclasses import dataclass

from .._errors import InputError


@dataclass(frozen=True)
class Target:
    """A checked ``executor=`` argument, not yet connected."""

    kind: str          # "serial", "processes", "client", "cluster", "address", "scheduler-file"
    value: object = None
    jobs: int = 1


def function_bytes(function) -> bytes:
    """``function`` pickled for another process (cloudpickle: lambdas and closures too)."""
    import cloudpickle

    try:
        return cloudpickle.dumps(function)
    except Exception as exc:
        raise InputError(
            f"`function` cannot be sent to worker processes ({type(exc).__name__}: {exc}); "
            "define it at module top level and keep what it holds picklable"
        ) from None
