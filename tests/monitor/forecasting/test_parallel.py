"""Many water bodies on a Dask cluster give exactly the in-process results."""

from __future__ import annotations

import numpy as np
import pytest

from assimilation.filter_config import FilterConfig
from assimilation.observe import Observations
from assimilation.parameters import default_spec
from assimilation.spec import Basin, Drivers, Network
from monitor.forecasting.cycle import CycleInputs, compute
from monitor.forecasting.parallel import DaskRunner

T0 = 20574.0  # 2026-05-01T00:00Z in epoch days


def _drivers(times, temperature_C):
    n = len(times)
    light = 400.0 * np.clip(np.sin(2 * np.pi * (times % 1 - 0.25)), 0, None)
    return Drivers(times, np.full((n, 2), temperature_C), light, np.full((n, 1), 0.5),
                   np.full((n, 1), 800.0), np.full((n, 1), 15.0))


def _inputs(name: str, temperature_C: float, seed: int) -> CycleInputs:
    spec = default_spec([Basin("upper", 3e6, 4.0, 0.75e6), Basin("lower", 9e6, 9.0, 1e6)], Network((1, -1), (0,)))
    past = T0 + np.arange(0, 24 + 1) / 24
    future = T0 + 1 + np.arange(0, 24 * 3 + 1) / 24
    obs = Observations(np.full(4, T0 + 0.5), ["chlorophyll_fluorescence", "chlorophyll_fluorescence",
                                              "phycocyanin", "phycocyanin"],
                       [0, 1, 0, 1], [0, 1, -1, -1], [6.0, 3.0, 1.2, 0.4], [1.0, 0.8, 0.3, 0.3])
    return CycleInputs(name, T0 + 1, spec, FilterConfig(members=20, n_sensors=2), None, T0, None, seed, obs,
                       _drivers(past, temperature_C), [_drivers(future, temperature_C)], 3, (1.0, 10.0),
                       1.0, ("upper", "lower"))


@pytest.mark.slow
def test_cycles_on_a_local_dask_cluster_equal_the_in_process_cycles():
    inputs = [_inputs("north-pond", 21.0, 1), _inputs("south-pond", 24.0, 2)]
    local = [compute(i) for i in inputs]
    runner = DaskRunner("local")
    try:
        remote = runner.map(compute, inputs)
    finally:
        runner.close()
    for a, b in zip(local, remote):
        assert a.status == b.status == "ok"
        assert a.checkpoint == b.checkpoint  # same bytes: same ensemble, parameters and random state
        np.testing.assert_array_equal(a.forecasts["cyanobacteria_chlorophyll"].exceedance,
                                      b.forecasts["cyanobacteria_chlorophyll"].exceedance)
    # the two ponds differ, so the comparison is not trivially of identical work
    assert local[0].checkpoint != local[1].checkpoint
