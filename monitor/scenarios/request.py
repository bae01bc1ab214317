"""A what-if request: the actions an operator asks about, checked once, the same for every door.

The command line (``--action "release basin=fennick-arm flow_m3s=5 from_day=1 days=3"``), the
API (``{"actions": [{"kind": "release", "basin": "fennick-arm", "flow_m3s": 5, ...}]}``) and the
page's form all build the same mapping and pass it to :func:`parse_request`, which refuses bad
input with one short message (:class:`RequestError`) naming the action and the key.

Action kinds and their keys (units in the names; days count forecast days, day 1 being the
24 hours after the analysis):

``release``  basin, flow_m3s, from_day, days — more water through a basin, made up by the
             inflows that feed it (:class:`assimilation.scenarios.Release`)
``transfer`` basin, flow_m3s, from_day, days, nitrogen_ugL, phosphorus_ugL [, temperature_C] —
             water brought from elsewhere (:class:`assimilation.scenarios.Transfer`)
``load``     inflow, from_day [, nitrogen_pct] [, phosphorus_pct] — an inflow's nutrient
             concentrations changed by a percentage to the horizon
``intake``   basin — the basin the drinking-water intake draws from (which basin's outlook the
             drinking-water alert rule would use)
"""

from __future__ import annotations

import math
import shlex
from collections.abc import Mapping
from dataclasses import dataclass

from monitor.config import WaterBodyConfig

#: The longest horizon of a what-if [days].
MAX_HORIZON_DAYS = 14
#: The most ensemble members a what-if runs.
MAX_MEMBERS = 100
#: The most actions in one request.
MAX_ACTIONS = 10
#: A flow must not exchange a basin it passes through faster than this [h]: the model steps hourly.
MIN_TURNOVER_HOURS = 6.0
#: Temperatures a transferred water may have [°C] (liquid fresh water).
TEMPERATURE_RANGE_C = (0.0, 40.0)
#: Percent changes of an inflow's concentrations [%].
PERCENT_RANGE = (-100.0, 1000.0)

KEYS = {
    "release": {"required": ("basin", "flow_m3s", "from_day", "days"), "optional": ()},
    "transfer": {"required": ("basin", "flow_m3s", "from_day", "days", "nitrogen_ugL", "phosphorus_ugL"),
                 "optional": ("temperature_C",)},
    "load": {"required": ("inflow", "from_day"), "optional": ("nitrogen_pct", "phosphorus_pct")},
    "intake": {"required": ("basin",), "optional": ()},
}
KINDS = tuple(KEYS)


class RequestError(ValueError):
    """A what-if request that cannot be run; the message says what was expected."""


@dataclass(frozen=True)
class FlowAction:
    """A release or a transfer: ``flow_m3s`` [m³/s] through or into ``basin`` from forecast day
    ``from_day`` for ``days`` [d]; a transfer's water has DIN ``nitrogen_ugL`` [µg N/L], SRP
    ``phosphorus_ugL`` [µg P/L] and ``temperature_C`` [°C] (None: the receiving basin's)."""

    kind: str
    basin: str
    flow_m3s: float
    from_day: int
    days: float
    nitrogen_ugL: float | None = None
    phosphorus_ugL: float | None = None
    temperature_C: float | None = None


@dataclass(frozen=True)
class LoadAction:
    """Inflow ``inflow``'s DIN and SRP concentrations changed by ``nitrogen_pct`` and
    ``phosphorus_pct`` [%] from forecast day ``from_day`` to the horizon."""

    inflow: str
    from_day: int
    nitrogen_pct: float = 0.0
    phosphorus_pct: float = 0.0
    kind: str = "load"


@dataclass(frozen=True)
class IntakeAction:
    """The drinking-water intake drawn from ``basin``."""

    basin: str
    kind: str = "intake"


@dataclass(frozen=True)
class WhatIfRequest:
    actions: tuple
    horizon_days: int
    members: int | None = None   # None: all members of the analysis, up to MAX_MEMBERS

    @property
    def intake(self) -> IntakeAction | None:
        return next((a for a in self.actions if isinstance(a, IntakeAction)), None)

    def as_dict(self) -> dict:
        """The request as the API accepts it (and as the page puts it in its address)."""
        return {"horizon_days": self.horizon_days, **({"members": self.members} if self.members else {}),
                "actions": [action_dict(a) for a in self.actions]}


def action_dict(action) -> dict:
    """An action as a mapping that :func:`parse_request` accepts (kind first, keys left out when None)."""
    d = {k: v for k, v in action.__dict__.items() if v is not None}
    return {"kind": d.pop("kind"), **d}


def parse_action_text(text: str) -> dict:
    """``"release basin=fennick-arm flow_m3s=5 from_day=1 days=3"`` → the action's mapping."""
    try:
        words = shlex.split(text)
    except ValueError as exc:
        raise RequestError(f"action {text!r}: {exc}") from None
    if not words:
        raise RequestError("an action needs a kind, e.g. 'release basin=… flow_m3s=… from_day=… days=…'")
    out = {"kind": words[0]}
    for word in words[1:]:
        key, sep, value = word.partition("=")
        if not sep or not key:
            raise RequestError(f"action {text!r}: expected key=value, got {word!r}")
        if key in out:
            raise RequestError(f"action {text!r}: {key} given twice")
        out[key] = value
    return out


def _number(where: str, key: str, value) -> float:
    if isinstance(value, bool):
        raise RequestError(f"{where}: {key} must be a number, got {value!r}")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise RequestError(f"{where}: {key} must be a number, got {value!r}") from None
    if not math.isfinite(x):
        raise RequestError(f"{where}: {key} must be a finite number, got {value!r}")
    return x


def _whole(where: str, key: str, value, lo: int, hi: int) -> int:
    x = _number(where, key, value)
    if x != int(x) or not lo <= x <= hi:
        raise RequestError(f"{where}: {key} must be a whole number from {lo} to {hi}, got {value!r}")
    return int(x)


def _in_range(where: str, key: str, value, lo: float, hi: float, unit: str) -> float:
    x = _number(where, key, value)
    if not lo <= x <= hi:
        raise RequestError(f"{where}: {key} must be from {lo:g} to {hi:g} {unit}, got {x:g}")
    return x


def _choice(where: str, key: str, value, ids: list[str], what: str) -> str:
    if value not in ids:
        raise RequestError(f"{where}: {key} must be one of the {what} {', '.join(ids)}; got {value!r}")
    return str(value)


def _downstream_path(wb: WaterBodyConfig, basin: str) -> list[str]:
    path, node = [], basin
    while node != "outlet":
        path.append(node)
        node = next(b.flows_to for b in wb.basins if b.id == node)
    return path


def _through(wb: WaterBodyConfig, basin: str) -> list[str]:
    """Basins that the water of a flow through or into ``basin`` passes: for a release also those
    its feeding inflows cross on the way."""
    basins = set(_downstream_path(wb, basin))
    for inflow in wb.inflows:
        path = _downstream_path(wb, inflow.basin)
        if basin in path:
            basins.update(path[:path.index(basin)])
    return sorted(basins)


def _action(item, index: int, wb: WaterBodyConfig, horizon: int):
    if not isinstance(item, Mapping):
        raise RequestError(f"action {index}: expected an object with a kind and its keys, got {item!r}")
    kind = item.get("kind")
    if kind not in KEYS:
        raise RequestError(f"action {index}: kind must be one of {', '.join(KINDS)}; got {kind!r}")
    where = f"action {index} ({kind})"
    spec = KEYS[kind]
    unknown = sorted(set(item) - {"kind", *spec["required"], *spec["optional"]})
    if unknown:
        raise RequestError(f"{where}: unknown key {unknown[0]!r}; expected "
                           f"{', '.join(spec['required'] + spec['optional'])}")
    missing = [k for k in spec["required"] if item.get(k) in (None, "")]
    if missing:
        raise RequestError(f"{where}: {missing[0]} is missing")
    basin_ids = [b.id for b in wb.basins]
    if kind == "intake":
        if wb.use != "drinking-water":
            raise RequestError(f"{where}: {wb.name} is a {wb.use} water body and has no drinking-water intake")
        return IntakeAction(_choice(where, "basin", item["basin"], basin_ids, "basins"))
    from_day = _whole(where, "from_day", item["from_day"], 1, horizon)
    if kind == "load":
        inflow = _choice(where, "inflow", item["inflow"], [i.id for i in wb.inflows], "inflows")
        pct = {k: _in_range(where, k, item[k], *PERCENT_RANGE, "%") if item.get(k) not in (None, "") else 0.0
               for k in ("nitrogen_pct", "phosphorus_pct")}
        return LoadAction(inflow, from_day, **pct)
    basin = _choice(where, "basin", item["basin"], basin_ids, "basins")
    days = _number(where, "days", item["days"])
    last = horizon - from_day + 1
    if not 0 < days <= last:
        raise RequestError(f"{where}: days must be more than 0 and, from day {from_day}, at most {last:g} "
                           f"(the horizon is {horizon} days); got {days:g}")
    flow = _number(where, "flow_m3s", item["flow_m3s"])
    if not flow > 0:
        raise RequestError(f"{where}: flow_m3s must be more than 0 m³/s, got {flow:g}")
    smallest = min((b for b in wb.basins if b.id in _through(wb, basin)), key=lambda b: b.volume_m3)
    limit = smallest.volume_m3 / (MIN_TURNOVER_HOURS * 3600.0)
    if flow > limit:
        raise RequestError(f"{where}: {flow:g} m³/s would exchange {smallest.name} in less than "
                           f"{MIN_TURNOVER_HOURS:g} hours, faster than the model's hourly steps can follow; "
                           f"at most {limit:.0f} m³/s")
    if kind == "release":
        if not any(basin in _downstream_path(wb, i.basin) for i in wb.inflows):
            raise RequestError(f"{where}: no inflow feeds {basin}, so no water can be released through it; "
                               f"use a transfer of water from elsewhere")
        return FlowAction("release", basin, flow, from_day, days)
    nitrogen = _number(where, "nitrogen_ugL", item["nitrogen_ugL"])
    phosphorus = _number(where, "phosphorus_ugL", item["phosphorus_ugL"])
    for key, value in (("nitrogen_ugL", nitrogen), ("phosphorus_ugL", phosphorus)):
        if value < 0:
            raise RequestError(f"{where}: {key} must be 0 or more µg/L, got {value:g}")
    temperature = None
    if item.get("temperature_C") not in (None, ""):
        temperature = _in_range(where, "temperature_C", item["temperature_C"], *TEMPERATURE_RANGE_C, "°C")
    return FlowAction("transfer", basin, flow, from_day, days, nitrogen, phosphorus, temperature)


def parse_request(data, wb: WaterBodyConfig) -> WhatIfRequest:
    """Check a what-if request for ``wb``: a mapping with ``actions`` (a list of mappings) and
    optionally ``horizon_days`` (default the water body's alert horizon, at most
    :data:`MAX_HORIZON_DAYS`) and ``members``. RequestError on the first problem."""
    if not isinstance(data, Mapping):
        raise RequestError("a what-if request is an object with 'actions' (and optionally 'horizon_days', "
                           "'members')")
    unknown = sorted(set(data) - {"actions", "horizon_days", "members"})
    if unknown:
        raise RequestError(f"unknown key {unknown[0]!r}; expected actions, horizon_days, members")
    horizon = data.get("horizon_days")
    horizon = (min(wb.alerts.horizon_days, MAX_HORIZON_DAYS) if horizon in (None, "")
               else _whole("request", "horizon_days", horizon, 1, MAX_HORIZON_DAYS))
    members = data.get("members")
    members = None if members in (None, "") else _whole("request", "members", members, 2, MAX_MEMBERS)
    actions = data.get("actions")
    if not isinstance(actions, (list, tuple)) or not actions:
        raise RequestError("actions must be a list of one or more actions")
    if len(actions) > MAX_ACTIONS:
        raise RequestError(f"at most {MAX_ACTIONS} actions in one what-if, got {len(actions)}")
    parsed = tuple(_action(item, i, wb, horizon) for i, item in enumerate(actions, start=1))
    if sum(isinstance(a, IntakeAction) for a in parsed) > 1:
        raise RequestError("at most one intake action: the intake draws from one basin")
    return WhatIfRequest(parsed, horizon, members)
