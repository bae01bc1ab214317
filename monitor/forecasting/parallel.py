"""Many water bodies at once on a Dask distributed cluster.

A cycle's compute step is a pure function of picklable inputs
(``monitor.forecasting.cycle.compute``), so it can run on any worker. ``address`` is a
scheduler address (``tcp://host:8786``) or ``"local"`` for a cluster of
worker processes on this machine.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence


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

    def map(self, fn: Callable, items: Sequence) -> list:
        client = self._connect()
        return client.gather(client.map(fn, list(items), pure=False))

    def close(self) -> None:
        if self._client is not None:
            self._client.close()
        if self._cluster is not None:
            self._cluster.close()
        self._client = self._cluster = None
