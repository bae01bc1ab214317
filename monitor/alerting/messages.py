"""The text of Bloomline's emails: an alert change and a sign-up confirmation.

Pure functions from a water body's config, an alert event and a
subscriber to an :class:`EmailContent`: a subject, a plain-text body, the
same content as HTML, and (alert emails to a subscriber) the one-click
unsubscribe link for the ``List-Unsubscribe`` header (RFC 2369 §3.2,
RFC 8058). Every email names the alert framework with its public citation
and carries the caution; links start at the configured ``[service]
base_url``.
"""

from __future__ import annotations

import datetime as dt
import html
from dataclasses import dataclass

from monitor.alerting.caution import CAUTION
from monitor.alerting.frameworks import FRAMEWORKS
from monitor.alerting.levels import level_label
from monitor.alerting.subscriptions import Subscriber


@dataclass(frozen=True)
class EmailContent:
    subject: str
    text: str
    html: str
    unsubscribe_url: str | None = None  # for List-Unsubscribe (alert emails to a subscriber)


def _label(water_body, level: int) -> str:
    """A level's name with its threshold, as emails give it: 'Alert Level 1 (1 µg/L)'."""
    return level_label(water_body, level, with_threshold=True)


def framework_line(water_body) -> str:
    """The framework in use, with its public citation, in one sentence."""
    fw = FRAMEWORKS.get(water_body.alerts.framework)
    if fw is None:
        return f"Alert levels: {water_body.alerts.framework} (levels set in this water body's configuration)."
    return f"Alert levels: {fw.title}. Source: {fw.source}"


def basin_name(water_body, basin_id: str) -> str:
    for b in water_body.basins:
        if b.id == basin_id:
            return b.name
    return basin_id


def _fmt_time(t: dt.datetime) -> str:
    return t.astimezone(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")


def _link(base_url: str, path: str) -> str:
    """``path`` under the configured base URL (one slash between them)."""
    return f"{base_url.rstrip('/')}/{path.lstrip('/')}"


def unsubscribe_url(base_url: str, subscriber: Subscriber) -> str:
    """The subscriber's unsubscribe link: a page for people, and the RFC 8058 one-click POST target."""
    return _link(base_url, f"unsubscribe/{subscriber.token}")


def _why(water_body, event: dict) -> str:
    parts = []
    p = event.get("probability")
    level = max(event["to_level"], event["from_level"])  # a lowering reports the level it left
    if p is not None:
        parts.append(f"forecast probability of reaching {_label(water_body, level)} within "
                     f"{water_body.alerts.horizon_days} days: {100 * p:.0f} % (a warning is raised at "
                     f"{100 * water_body.alerts.warn_probability:.0f} %)")
    else:
        parts.append("no forecast probability was available for this cycle")
    obs = event.get("observed_ugL")
    if obs is not None:
        parts.append(f"latest observed daily mean of cyanobacterial chlorophyll-a (phycocyanin sensor): {obs:.2f} µg/L")
    else:
        parts.append("no QC-passed observation of cyanobacterial chlorophyll-a in the latest day")
    return "; ".join(parts) + "."


def _html(title: str, paragraphs: list[str], links: list[tuple[str, str]], footer: list[str]) -> str:
    """A small, self-contained HTML body: escaped text, links, the caution set apart."""
    esc = html.escape
    body = [f"<p>{esc(p)}</p>" for p in paragraphs]
    body += [f'<p>{esc(label)}: <a href="{esc(url, quote=True)}">{esc(url)}</a></p>' for label, url in links]
    body.append(f'<p style="border-left:4px solid #b35c00;padding-left:8px"><strong>{esc(CAUTION)}</strong></p>')
    body += [f'<p style="color:#555;font-size:90%">{f}</p>' for f in footer]
    return ('<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
            f"<title>{esc(title)}</title></head>\n<body style=\"font-family:sans-serif;max-width:40em\">\n"
            + "\n".join(body) + "\n</body></html>\n")


def render_alert(water_body, event: dict, *, base_url: str, subscriber: Subscriber | None = None) -> EmailContent:
    """The email for one alert change: subject, plain text, HTML and the unsubscribe link.

    ``event`` is a dict as returned by :func:`monitor.alerting.rules.evaluate_run`
    (water_body_id, basin_id, time_utc, from_level, to_level, probability,
    observed_ugL, reason). A lowering to level 0 is the "cleared" email; it
    says that no alert level is forecast, never that the water is safe.
    """
    basin = basin_name(water_body, event["basin_id"])
    where = f"{basin}, {water_body.name}"
    old, new = event["from_level"], event["to_level"]
    page = _link(base_url, f"water-bodies/{water_body.id}")
    if new > old:
        subject = f"Bloomline alert: {where} raised to {_label(water_body, new)}"
        lv = water_body.alerts.levels[new - 1]
        first = (f"The alert level for {where} has been raised from {_label(water_body, old)} "
                 f"to {_label(water_body, new)}"
                 + (f": {lv.meaning}." if lv.meaning else "."))
    elif new == 0:
        subject = f"Bloomline: {where} cleared, no alert level forecast"
        first = (f"The alert for {where} has been cleared: {_label(water_body, old)} is no longer "
                 f"forecast for the next {water_body.alerts.horizon_days} days and the latest observation "
                 "is below it. No alert level is forecast. This is not a safety clearance: check the "
                 "authority's advisories before using the water.")
    else:
        subject = f"Bloomline: {where} lowered to {_label(water_body, new)}"
        first = (f"The alert level for {where} has been lowered from {_label(water_body, old)} "
                 f"to {_label(water_body, new)}. {_label(water_body, new)} still applies.")
    why = "Why: " + _why(water_body, event)
    when = f"Analysis time: {_fmt_time(event['time_utc'])}"
    framework = framework_line(water_body)
    lines = [first, "", why, when, framework, "", f"Forecast and history: {page}", "", CAUTION]
    footer: list[str] = []
    unsubscribe = None
    if subscriber is not None:
        unsubscribe = unsubscribe_url(base_url, subscriber)
        why_you = (f"You receive this because {subscriber.email} is subscribed to alerts for {water_body.name} "
                   f"at {_label(water_body, subscriber.min_level)} and above.")
        lines += ["", why_you, f"Unsubscribe: {unsubscribe}"]
        esc = html.escape
        footer = [esc(why_you), f'<a href="{esc(unsubscribe, quote=True)}">Unsubscribe</a>']
    text = "\n".join(lines) + "\n"
    return EmailContent(subject, text, _html(subject, [first, why, when, framework],
                                             [("Forecast and history", page)], footer), unsubscribe)


def render_confirmation(water_body, subscriber: Subscriber, *, base_url: str) -> EmailContent:
    """The email asking a web sign-up to confirm its address."""
    subject = f"Bloomline: confirm your alert subscription for {water_body.name}"
    ask = (f"Someone, probably you, asked to receive Bloomline alert emails for {water_body.name} "
           f"at {_label(water_body, subscriber.min_level)} and above.")
    confirm = _link(base_url, f"subscribe/confirm/{subscriber.token}")
    ignore = "If you did not ask for this, ignore this email: nothing is sent until the link is followed."
    text = "\n".join([ask, "", f"Confirm: {confirm}", "", ignore, "", CAUTION]) + "\n"
    return EmailContent(subject, text, _html(subject, [ask], [("Confirm", confirm)], [html.escape(ignore)]))
