"""The daily cycle of many water bodies: batched gather, compute in-process or on Dask, batched record.

The driver reads a chunk of water bodies with a few set-based queries
(:func:`monitor.forecasting.batch_gather.fetch_many`); each water body's
inputs are assembled and computed by :func:`cycle_task`, a pure function
that runs in-process or on a Dask distributed worker (results streamed back
as they finish, :func:`monitor.forecasting.parallel.stream`); the outputs
are recorded ``RECORD_BATCH`` at a time
(:func:`monitor.forecasting.batch_record.record_many`). Each step is guarded
per water body: one that fails is reported with the step, the others go on.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass

from monitor.config import Config, WaterBodyConfig
from monitor.forecasting import batch_gather, cycle

#: Outputs recorded per transaction.
RECORD_BATCH = 50


@dataclass(frozen=True)
class StepFailed:
    """A water body whose cycle failed before its compute step (no run is recorded)."""

    water_body_id: str
    step: str
    error: BaseException


def compute_guarded(inputs: cycle.CycleInputs) -> cycle.CycleOutputs:
    """:func:`cycle.compute`, with any exception turned into a "failed" output of that water body."""
    try:
        return cycle.compute(inputs)
    except Exception as exc:  # noqa: BLE001 - reported as the water body's status, never raised
        return cycle.CycleOutputs(inputs.water_body_id, inputs.analysis_d, "failed",
                                  f"compute failed: {type(exc).__name__}: {exc}", None, {}, {}, inputs.basin_ids)


def cycle_task(config: Config, raw: batch_gather.RawInputs) -> cycle.CycleOutputs | StepFailed:
    """Assemble one water body's inputs and compute its cycle (no I/O: runs on a worker)."""
    try:
        inputs = batch_gather.assemble(config, config.water_body(raw.water_body_id), raw)
    except Exception as exc:  # noqa: BLE001 - that water body's gather failed
        return StepFailed(raw.water_body_id, "gather", exc)
    return compute_guarded(inputs)


def computed(engine, config: Config, bodies: Sequence[WaterBodyConfig], analysis: dt.datetime, *,
             season_start: dt.datetime | None = None, replay: bool = False, client=None,
             stopping=None) -> Iterator[cycle.CycleOutputs | StepFailed]:
    """Each water body's outputs (or the step that failed), in the order they finish.

    ``client``: a Dask distributed client (None: in-process). Chunks of
    ``batch_gather.CHUNK`` water bodies are read one after another; with a
    client, a chunk's tasks are all submitted before the next chunk is read.
    ``stopping`` (an Event): no further chunk is read once it is set.
    """
    from monitor.forecasting.parallel import stream

    for start in range(0, len(bodies), batch_gather.CHUNK):
        if stopping is not None and stopping.is_set():
            return
        raws = []
        for wb_id, raw in batch_gather.fetch_many(engine, config, bodies[start:start + batch_gather.CHUNK], analysis,
                                                  season_start=season_start, replay=replay):
            if isinstance(raw, Exception):
                yield StepFailed(wb_id, "gather", raw)
            else:
                raws.append(raw)
        if client is None:
            yield from (cycle_task(config, raw) for raw in raws)
            continue
        for wb_id, result in stream(client, cycle_task, config, raws, key_of=lambda r: r.water_body_id):
            if isinstance(result, BaseException):
                yield StepFailed(wb_id, "compute", result)
            else:
                yield result


def batches(items: Iterable, size: int) -> Iterator[list]:
    """``items`` in lists of ``size`` (the last may be shorter)."""
    batch: list = []
    for item in items:
        batch.append(item)
        if len(batch) >= size:
            yield batch
            batch = []
    if batch:
        yield batch
