"""Query parameters, checked the same way on every endpoint.

Each view names the parameters it accepts (:func:`accept`); any other
parameter, a repeated one, a number that is not an integer or lies out of
range, a time that is not ISO 8601 or a value outside a list answers 400
with a message that says what was expected. Numbers are bounded so that
nothing a client sends can overflow a database integer.
"""

from __future__ import annotations

import datetime as dt

from flask import abort, request

from monitor.store.status import MAX_ID

#: Format names offered by table endpoints.
FORMATS = ("json", "csv")


def accept(*names: str) -> None:
    """Refuse a parameter not among ``names``, or one given more than once."""
    allowed = set(names)
    for name in request.args:
        if name not in allowed:
            expected = ", ".join(sorted(allowed)) if allowed else "none"
            abort(400, description=f"unknown parameter {name!r}; this endpoint takes: {expected}")
        if len(request.args.getlist(name)) > 1:
            abort(400, description=f"parameter {name!r} is given more than once")


def integer(name: str, default: int | None, *, minimum: int, maximum: int) -> int | None:
    """An integer parameter in [minimum, maximum], or ``default`` when absent (an empty value is not
    an integer: 400, as the OpenAPI document's integer type says)."""
    value = request.args.get(name)
    if value is None:
        return default
    text = value.strip()
    if not (text.isascii() and text.lstrip("+-").isdigit()) or len(text) > 20:
        abort(400, description=f"{name} must be an integer between {minimum} and {maximum}, got {value[:40]!r}")
    number = int(text)
    if not minimum <= number <= maximum:
        abort(400, description=f"{name} must be between {minimum} and {maximum}, got {number}")
    return number


def path_id(value: str, what: str) -> int:
    """An id from the URL path (digits matched by the route), checked against the integer range."""
    number = int(value) if value.isascii() and value.isdigit() and len(value) <= 20 else -1
    if not 1 <= number <= MAX_ID:
        abort(400, description=f"{what} must be an integer between 1 and {MAX_ID}, got {value[:40]!r}")
    return number


def choice(name: str, options: tuple[str, ...] | list[str], default: str | None) -> str | None:
    """One of ``options``, or ``default`` when absent."""
    value = request.args.get(name)
    if value is None:
        return default
    if value not in options:
        abort(400, description=f"{name} must be one of {', '.join(options)}, got {value[:60]!r}")
    return value


def time(name: str) -> dt.datetime | None:
    """An ISO 8601 date or time (UTC when it has no offset) as aware UTC, or None when absent."""
    value = request.args.get(name)
    if value is None or value == "":
        return None
    try:
        t = dt.datetime.fromisoformat(value.replace("Z", "+00:00"))
    except ValueError:
        abort(400, description=f"{name} must be an ISO 8601 date or time, got {value[:60]!r}")
    if not 1900 <= t.year <= 2199:
        abort(400, description=f"{name} must lie in the years 1900-2199, got {value[:60]!r}")
    t = t if t.tzinfo is not None else t.replace(tzinfo=dt.UTC)
    return t.astimezone(dt.UTC)


def fmt(options: tuple[str, ...] = FORMATS) -> str:
    """The ``format`` parameter (default json) among the formats this endpoint offers."""
    value = request.args.get("format", "json")
    if value not in options:
        offered = " or ".join(options)
        abort(400, description=f"format must be {offered} for this endpoint, got {value[:40]!r}")
    return value
