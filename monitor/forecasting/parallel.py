"""Many water bodies at once on a Dask distributed cluster.

A cycle's compute step is a pure function of picklable inputs
(``monitor.forecasting.cycle.compute``), so it can run on any worker. ``address`` is a
scheduler address (``tcp://host:8786``) or ``"local"`` for a cluster of
worker processes on this machine. :func:`stream` submits many water bodies'
tasks and yields their results as they finish (``distributed.as_completed``),
so the driver records while the workers compute.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence


class DaskRunner:
    """Maps a function over inputs on a Dask cluster; the client is made on first use."""

    def __init__(self, address: str):
        self.address = address
        self._client = None
        self._cluster = None

    def _connect(self):
        from distributed import Client, LocalCluster

        if self._client is None:
            if self.address == "local":
                self._cluster = LocalCluster(processes=True, threads_per_worker=1, dashboard_address=None)
                self._client = Client(self._cluster)
            else:
                self._client = Client(self.address)
        return self._client

    @property
    def client(self):
        """The distributed ``Client`` (connected on first use)."""
        return self._connect()

    def map(self, fn: Callable, items: Sequence) -> list:
        client = self._connect()
        return client.gather(client.map(fn, list(items), pure=False))

    def close(self) -> None:
        if self._client is not None:
            self._client.close()
        if self._cluster is not None:
            self._cluster.close()
        self._client = self._cluster = None


def stream(client, fn: Callable, shared, items: Sequence, *, key_of: Callable, retries: int = 2
           ) -> Iterator[tuple[str, object]]:
    """``fn(shared, item)`` for each item on a Dask distributed ``client``, yielded as each finishes.

    ``shared`` (the config) goes to every worker once (``scatter(broadcast=True)``); each item is sent
    once, to the worker that runs it. Yields (``key_of(item)``, result), or (key, exception) for an
    item whose task failed ``retries`` + 1 times (a worker lost mid-task is not a failure: the
    scheduler runs its tasks again elsewhere, up to ``distributed.scheduler.allowed-failures``
    times, and raises ``KilledWorker`` after that).
    """
    from distributed import as_completed

    if not items:
        return
    shared_future = client.scatter(shared, broadcast=True, hash=False)
    futures = {client.submit(fn, shared_future, item, pure=False, retries=retries): key_of(item) for item in items}
    for future in as_completed(futures):
        key = futures[future]
        try:
            result = future.result()
        except Exception as exc:  # noqa: BLE001 - reported as that item's failure; the others go on
            yield key, exc
        else:
            yield key, result
        future.release()
