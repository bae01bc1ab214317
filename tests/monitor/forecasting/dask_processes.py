"""A Dask scheduler and worker processes started with the ``dask`` command, on free local ports."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from pathlib import Path


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class DaskProcesses:
    """``dask scheduler`` and ``dask worker`` processes (one thread each); stop them with :meth:`stop`."""

    def __init__(self, workers: int, folder: Path):
        self.address = f"tcp://127.0.0.1:{free_port()}"
        repo = str(Path(__file__).resolve().parents[3])
        env = {**os.environ, "PYTHONPATH": os.pathsep.join([repo, os.environ.get("PYTHONPATH", "")])}
        dask = [sys.executable, "-m", "distributed.cli.dask_scheduler"]
        self.scheduler = subprocess.Popen([*dask, "--host", "127.0.0.1", "--port", self.address.rsplit(":", 1)[1],
                                           "--dashboard-address", ":0", "--no-show"], env=env, cwd=folder,
                                          stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        self.workers = [subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker", self.address,
                                          "--nthreads", "1", "--nworkers", "1", "--no-nanny",
                                          "--dashboard-address", ":0", "--local-directory", str(folder)],
                                         env=env, cwd=folder, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
                        for _ in range(workers)]

    def wait_for_workers(self, client, n: int, timeout_s: float = 60.0) -> None:
        deadline = time.monotonic() + timeout_s
        while len(client.scheduler_info()["workers"]) < n:
            if time.monotonic() > deadline:
                raise TimeoutError(f"{n} Dask workers did not connect within {timeout_s:g} s")
            time.sleep(0.2)

    def stop(self) -> None:
        for p in [*self.workers, self.scheduler]:
            if p.poll() is None:
                p.terminate()
        for p in [*self.workers, self.scheduler]:
            try:
                p.wait(timeout=10)
            except subprocess.TimeoutExpired:
                p.kill()
