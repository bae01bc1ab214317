"""Which water bodies a status list shows: filters by region and alert level, pages, a count per level.

Shared by the status overview page and the API's ``/water-bodies`` and
``/status``, so thousands of water bodies are read a page at a time:
``region`` (a configured region; another shows no water body), ``level`` (the water body's
highest current alert level over its basins, 0 = none; one query over
``alert_status``, :func:`monitor.store.status.current_levels`), ``page``
(from 1) and ``per_page`` (1 to ``PER_PAGE_MAX``). The count per level is
taken after the region filter and before the level filter, so it says what
each level filter would show.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from urllib.parse import urlencode

from flask import request

from monitor.config import Config, WaterBodyConfig
from monitor.store import status
from web import params

#: Water bodies per page: default and largest.
PER_PAGE_DEFAULT, PER_PAGE_MAX = 50, 500
#: The largest ``level`` accepted (a level no framework has shows no water body).
LEVEL_MAX = 9
#: The parameters of a listing.
PARAMETERS = ("page", "per_page", "level", "region")


@dataclass
class Listing:
    bodies: list[WaterBodyConfig]   # the water bodies of this page, in config order
    total: int                      # water bodies through the filters
    page: int
    per_page: int
    level: int | None
    region: str | None
    by_level: dict[int, int] = field(default_factory=dict)  # level → water bodies (region filter only)
    regions: list[str] = field(default_factory=list)
    next: str | None = None
    previous: str | None = None

    @property
    def pages(self) -> int:
        return max(1, -(-self.total // self.per_page))

    def paging(self) -> dict:
        """The ``paging`` object of an API answer."""
        return {"page": self.page, "per_page": self.per_page, "total": self.total, "pages": self.pages,
                "next": self.next, "previous": self.previous}

    def link_header(self) -> dict:
        """The ``Link`` header (RFC 8288) naming the next and previous pages."""
        links = [f'<{u}>; rel="{rel}"' for u, rel in ((self.next, "next"), (self.previous, "prev")) if u]
        return {"Link": ", ".join(links)} if links else {}

    def summary(self) -> dict:
        """The ``summary`` object of an API answer: water bodies per current alert level."""
        return {"water_bodies": sum(self.by_level.values()), "region": self.region,
                "by_level": {str(k): v for k, v in sorted(self.by_level.items())}}

    def url(self, **changes) -> str:
        """This listing's URL with some parameters changed (None drops one; a new filter starts at page 1)."""
        args = {k: v for k, v in request.args.items()}
        if any(k in changes for k in ("level", "region", "per_page")):
            args.pop("page", None)
        for k, v in changes.items():
            if v is None:
                args.pop(k, None)
            else:
                args[k] = str(v)
        return f"{request.path}?{urlencode(args)}" if args else request.path


def max_level(config: Config) -> int:
    """The highest alert level number of any configured framework."""
    return max((len(wb.alerts.levels) for wb in config.water_bodies), default=0)


def regions(config: Config) -> list[str]:
    """The configured regions, sorted."""
    return sorted({wb.region for wb in config.water_bodies if wb.region})


def listing(config: Config, engine) -> Listing:
    """The water bodies the request's ``region``, ``level``, ``page`` and ``per_page`` choose (400 when
    a number is out of range; a page past the last, an unknown region or level is empty)."""
    names = regions(config)
    region = request.args.get("region")
    level = params.integer("level", None, minimum=0, maximum=LEVEL_MAX)
    page = params.integer("page", 1, minimum=1, maximum=status.MAX_ID)
    per_page = params.integer("per_page", PER_PAGE_DEFAULT, minimum=1, maximum=PER_PAGE_MAX)
    bodies = [wb for wb in config.water_bodies if region is None or wb.region == region]
    levels = status.current_levels(engine)
    by_level = dict.fromkeys(range(max_level(config) + 1), 0)
    for wb in bodies:
        by_level[levels.get(wb.id, 0)] = by_level.get(levels.get(wb.id, 0), 0) + 1
    if level is not None:
        bodies = [wb for wb in bodies if levels.get(wb.id, 0) == level]
    first = (page - 1) * per_page
    out = Listing(bodies[first:first + per_page], len(bodies), page, per_page, level, region, by_level, names)
    out.next = out.url(page=page + 1) if first + per_page < len(bodies) else None
    out.previous = out.url(page=min(page - 1, out.pages)) if page > 1 else None
    return out
