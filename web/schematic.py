"""The schematic of a water body: its basins and flows as boxes and arrows, coloured by status.

Basins are laid out top to bottom in the direction of flow: a basin's row
is how many basins its water passes through before it (upstream
basins first), the outlet below the last; basins of one row stand side by
side. Inflows enter from above their basin. The result is plain geometry
(SVG user units) that the page template draws as inline SVG, each box a
link to the basin's page and filled with its alert level's colour
(:mod:`web.palette` via the ``fill-<level>`` classes).
"""

from __future__ import annotations

from dataclasses import dataclass

WIDTH = 360
BOX_H = 54
ROW_GAP = 40
INFLOW_H = 34
MARGIN = 8


@dataclass(frozen=True)
class Box:
    basin_id: str
    name: str
    x: float
    y: float
    w: float
    h: float
    fill: str  # CSS class: fill-none, fill-0, fill-<n>
    label: str  # the state in words


@dataclass(frozen=True)
class Arrow:
    x1: float
    y1: float
    x2: float
    y2: float
    label: str = ""


@dataclass(frozen=True)
class Schematic:
    width: float
    height: float
    boxes: tuple[Box, ...]
    arrows: tuple[Arrow, ...]


def _rows(water_body) -> dict[str, int]:
    """Each basin's row: the length of the longest chain of basins flowing into it."""
    upstream: dict[str, list[str]] = {b.id: [] for b in water_body.basins}
    for b in water_body.basins:
        if b.flows_to in upstream:
            upstream[b.flows_to].append(b.id)
    rows: dict[str, int] = {}

    def row(basin_id: str, seen: frozenset = frozenset()) -> int:
        if basin_id not in rows:
            ups = [u for u in upstream[basin_id] if u not in seen]  # the config refuses cycles; stay safe
            rows[basin_id] = 1 + max((row(u, seen | {basin_id}) for u in ups), default=-1)
        return rows[basin_id]

    for b in water_body.basins:
        row(b.id)
    return rows


def layout(water_body, states: dict[str, tuple[str, str]]) -> Schematic:
    """The schematic of ``water_body``; ``states[basin_id] = (fill class, state in words)``."""
    rows = _rows(water_body)
    top = INFLOW_H + MARGIN if water_body.inflows else MARGIN
    by_row: dict[int, list] = {}
    for b in water_body.basins:
        by_row.setdefault(rows[b.id], []).append(b)
    boxes: dict[str, Box] = {}
    for r, members in sorted(by_row.items()):
        w = (WIDTH - 2 * MARGIN - (len(members) - 1) * MARGIN) / len(members)
        for i, b in enumerate(members):
            fill, label = states.get(b.id, ("fill-none", "no forecast yet"))
            boxes[b.id] = Box(b.id, b.name, MARGIN + i * (w + MARGIN), top + r * (BOX_H + ROW_GAP), w, BOX_H,
                              fill, label)
    arrows = []
    bottom = max(box.y + box.h for box in boxes.values())
    for b in water_body.basins:
        box = boxes[b.id]
        x = box.x + box.w / 2
        if b.flows_to in boxes:
            to = boxes[b.flows_to]
            arrows.append(Arrow(x, box.y + box.h, to.x + to.w / 2, to.y))
        else:
            arrows.append(Arrow(x, box.y + box.h, x, bottom + ROW_GAP * 0.8, "outlet"))
    fed = {b.flows_to for b in water_body.basins}
    for basin_id, box in boxes.items():
        into = [i for i in water_body.inflows if i.basin == basin_id]
        for k, inflow in enumerate(into):
            if basin_id in fed:  # the middle is taken by the flow from upstream: inflows enter on the right
                x = box.x + box.w * (0.62 + 0.3 * k / max(1, len(into)))
                arrows.append(Arrow(x, box.y - INFLOW_H, x, box.y, inflow.name))
            else:  # spread over the box's width
                x = box.x + box.w * (k + 1) / (len(into) + 1)
                arrows.append(Arrow(x, box.y - INFLOW_H, x, box.y, inflow.name))
    height = bottom + ROW_GAP + MARGIN
    return Schematic(WIDTH, height, tuple(boxes[b.id] for b in water_body.basins), tuple(arrows))
