"""The cycle's pure step forecasts exactly the quantities the store and the API offer."""

from __future__ import annotations

from monitor.forecasting.cycle import compute, forecast_rows
from monitor.forecasting.quantities import QUANTITIES, UNITS
from tests.monitor.forecasting.test_parallel import _inputs


def test_compute_forecasts_every_offered_quantity_with_levels_only_for_cyanobacteria():
    outputs = compute(_inputs("north-pond", 21.0, 1))
    assert outputs.status == "ok"
    assert tuple(outputs.forecasts) == QUANTITIES and set(UNITS) == set(QUANTITIES)
    statistics = {(q, s) for _b, _t, q, s, _v in forecast_rows(outputs)}
    assert {q for q, _s in statistics} == set(QUANTITIES)
    # two alert levels (1 and 10 µg/L) in the inputs: exceedance rows for the alerting quantity alone
    assert {q for q, s in statistics if s.startswith("p_level_")} == {"cyanobacteria_chlorophyll"}
    assert {s for q, s in statistics if s.startswith("p_level_")} == {"p_level_1", "p_level_2"}
