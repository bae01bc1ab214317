"""The forecast Bloomline publishes: per basin, the calibrated blend of the process model and the
statistical forecasts issued with it (:mod:`assimilation.blend`), with its settings from the record
(:mod:`monitor.forecasting.blend_setup`).

Chlorophyll quantities with an observed series in a basin are blended there;
elsewhere, and for nitrogen and phosphorus, the process model is published as
it is. The statistical forecasts predict the observed variable: where that is
a fluorometer, they are divided by its estimated gain (the ensemble mean) to
join the process model in chlorophyll-a, and every member stored for
verification is multiplied back, so each is scored against what the sensor
reads. Besides the published members (``bloomline``), the process model's
own (``process_model``), the calibrated blend (``blend``) and the uncalibrated
blend (``blend_raw``, from which the calibration is learnt) are stored for
verification. The published probabilities of reaching each alert level (and
so the alerts) are the linear pool of the components' probabilities with the
blend's weights (:func:`assimilation.blend.pooled_probabilities`), the
quantiles those of the blended members. Which of the blend and the process
model is published is the ``[filter] published`` setting (default the blend).
"""

from __future__ import annotations

import numpy as np

from assimilation.blend import LeadSettings, blend, pooled_probabilities
from assimilation.forecast import DailyForecast, member_statistics
from monitor.forecasting.blend_setup import BLEND, PROCESS, UNCALIBRATED
from monitor.forecasting.history import OBSERVED_BY

GAIN_VARIABLES = ("chlorophyll_fluorescence",)


def publish(forecasts: dict[str, DailyForecast], baselines: list, basin_ids: tuple[str, ...],
            verified_by: dict, sensor_gain: dict, settings: dict[str, list[LeadSettings]],
            thresholds: dict[str, tuple[float, ...]], publish_blend: bool = True
            ) -> tuple[dict[str, DailyForecast], list]:
    """(published forecasts by quantity, member rows for verification).

    The blend is always computed and stored for verification (``blend``);
    it is published (``bloomline``) only with ``publish_blend``, otherwise
    the process model is.

    ``baselines`` rows and the returned rows are (basin, quantity, forecaster,
    observed variable, members (K + 1, M)); ``thresholds`` maps a quantity to
    the thresholds its probabilities are given for.
    """
    published = dict(forecasts)
    rows: list = []
    issued = {(b, q, f): a for b, q, f, _v, a in baselines}
    for quantity in OBSERVED_BY:
        fc = forecasts.get(quantity)
        if fc is None:
            continue
        members = fc.members.copy()
        thr = thresholds.get(quantity, ())
        pooled: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        blended_any = False
        for b, basin in enumerate(basin_ids):
            variable = verified_by.get((basin, quantity))
            if variable is None:
                continue
            process = fc.members[:, :, b]
            member_gain = sensor_gain.get(basin) if variable in GAIN_VARIABLES else None
            gain = float(np.mean(member_gain)) if member_gain is not None else 1.0
            components = {PROCESS: process}
            components.update({name: a / gain for (bb, q, name), a in issued.items() if bb == basin and q == quantity
                               and name != "persistence"})
            lead_settings = settings.get(quantity) or [LeadSettings({PROCESS: 1.0})] * (process.shape[0] - 1)
            out, raw = blend(components, PROCESS, lead_settings)
            if len(thr):
                pooled[b] = pooled_probabilities(components, PROCESS, lead_settings, thr)
            members[:, :, b] = out
            blended_any = True
            process_seen = process * (member_gain[None, :] if member_gain is not None else 1.0)
            rows += [(basin, quantity, "bloomline", variable, out * gain if publish_blend else process_seen),
                     (basin, quantity, PROCESS, variable, process_seen),
                     (basin, quantity, BLEND, variable, out * gain),
                     (basin, quantity, UNCALIBRATED, variable, raw * gain)]
        if blended_any and publish_blend:
            stats = member_statistics(fc.day_end_d, members, thr)
            for b, (daily, horizon) in pooled.items():
                stats.exceedance[:, b, :] = daily
                stats.horizon_exceedance[b, :] = horizon
            published[quantity] = stats
    return published, rows
