"""Scan batches on a Dask ``distributed`` cluster: a Client, a cluster, an address or a file.

Connecting has a timeout (:data:`CONNECT_TIMEOUT`), so an unreachable scheduler is a clear
error within seconds rather than a hang. Each batch is one Dask task running
:func:`~switchlaw.analysis._batch.run_batch` on the pickled function; the worker switches JAX
to float64 before running it.
"""

from __future__ import annotations

from .._errors import InputError
from ._batch import run_batch
from ._targets import Target, function_bytes

#: Seconds to wait for a scheduler to answer.
CONNECT_TIMEOUT = 5
#: Seconds to wait for a connected scheduler to have at least one worker.
WORKER_TIMEOUT = 60
#: Pickled functions larger than this (bytes) are sent to the workers once, not per task.
_SCATTER_ABOVE = 1_000_000


class DaskExecutor:
    """Batches as Dask tasks; closes the Client at the end only if it opened it."""

    def __init__(self, client, owned: bool, function):
        self.client = client
        self.owned = owned
        payload = function_bytes(function)
        if len(payload) > _SCATTER_ABOVE:
            payload = client.scatter(payload, broadcast=True, hash=False)
        self._payload = payload
        from distributed import as_completed

        self._completed = as_completed(loop=client.loop)
        self.workers = max(1, sum(client.nthreads().values()))
        self.slots = 2 * self.workers

    @classmethod
    def connect(cls, target: Target, function) -> "DaskExecutor":
        try:
            from distributed import Client
        except ImportError:
            raise InputError(
                "`executor`: a Dask scheduler needs dask.distributed, an optional dependency: "
                "pip install 'switchlaw[dask]'"
            ) from None

        if target.kind == "client":
            client, owned = target.value, False
        else:
            where = {"cluster": "the given cluster", "address": repr(target.value),
                     "scheduler-file": f"the address in scheduler file {target.value!r}"}[target.kind]
            try:
                if target.kind == "cluster":
                    client = Client(target.value, set_as_default=False)
                elif target.kind == "address":
                    client = Client(target.value, timeout=CONNECT_TIMEOUT, set_as_default=False)
                else:
                    client = Client(scheduler_file=target.value, timeout=CONNECT_TIMEOUT,
                                    set_as_default=False)
            except (OSError, TimeoutError, ValueError) as exc:
                raise InputError(
                    f"`executor`: no Dask scheduler answered at {where} within {CONNECT_TIMEOUT} s "
                    f"({type(exc).__name__}: {exc})"
                ) from None
            owned = True
        try:
            client.wait_for_workers(1, timeout=WORKER_TIMEOUT)
        except (OSError, TimeoutError) as exc:
            if owned:
                client.close()
            raise InputError(
                f"`executor`: the Dask scheduler at {client.scheduler.address} has no workers "
                f"(waited {WORKER_TIMEOUT} s: {exc})"
            ) from None
        try:
            return cls(client, owned, function)
        except BaseException:
            if owned:
                client.close()
            raise

    def submit(self, task):
        future = self.client.submit(run_batch, self._payload, task, pure=False)
        self._completed.add(future)
        return future

    def wait(self, handles):
        first = next(self._completed)
        return {first}, set(handles) - {first}

    def result(self, handle):
        return handle.result()

    def close(self, pending=()):
        if pending:
            self.client.cancel(list(pending))
        if self.owned:
            self.client.close()
