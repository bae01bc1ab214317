"""Alert-level frameworks: the published guidance Bloomline uses by default.

Each framework is a ladder of chlorophyll-a thresholds applied to the
cyanobacteria group's chlorophyll-a (the frameworks' "with cyanobacterial
dominance"). Every threshold can be replaced per water body in the config.

``source`` is the citation shown to the public (emails, pages, API);
``note`` is for maintainers only (how far a value has been checked against
the publication; see docs/references.md) and is never shown to the public.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class AlertLevel:
    number: int
    name: str
    chlorophyll_ugL: float  # cyanobacterial chlorophyll-a at which the level is reached [µg/L]
    meaning: str = ""


@dataclass(frozen=True)
class Framework:
    id: str
    title: str
    source: str  # public citation
    levels: tuple[AlertLevel, ...]
    note: str = ""  # maintainers' note on the values (never shown to the public)


FRAMEWORKS: dict[str, Framework] = {
    f.id: f
    for f in (
        Framework(
            id="who-1999-drinking-water",
            title="WHO alert levels for drinking-water sources (1999)",
            source=("Chorus & Bartram (eds.), Toxic Cyanobacteria in Water, WHO/E & FN Spon, 1999: "
                    "Alert Level 1 at 1 µg/L chlorophyll-a (2,000 cells/mL); Alert Level 2 at "
                    "50 µg/L (100,000 cells/mL)."),
            note="Alert Level 2 value from memory (docs/references.md).",
            levels=(
                AlertLevel(1, "Alert Level 1", 1.0, "cyanobacteria established: sample more often, check treatment"),
                AlertLevel(2, "Alert Level 2", 50.0, "high biomass: toxin analysis, treatment or alternative supply"),
            ),
        ),
        Framework(
            id="who-2003-recreation",
            title="WHO guidance levels for recreational waters (2003)",
            source=("WHO, Guidelines for Safe Recreational Water Environments, vol. 1, ch. 8, 2003: "
                    "relatively low probability of adverse effects at 10 µg/L chlorophyll-a with "
                    "cyanobacterial dominance; moderate probability at 50 µg/L."),
            levels=(
                AlertLevel(1, "Guidance level 1", 10.0, "relatively low probability of adverse health effects"),
                AlertLevel(2, "Guidance level 2", 50.0, "moderate probability of adverse health effects"),
            ),
        ),
        Framework(
            id="who-2021-drinking-water",
            title="WHO alert-levels framework for drinking water (2021)",
            source=("Chorus & Welker (eds.), Toxic Cyanobacteria in Water, 2nd ed., 2021, ch. 5: "
                    "Alert Level 1 at 1 µg/L, Alert Level 2 at 12 µg/L chlorophyll-a."),
            note="Values from memory (docs/references.md).",
            levels=(
                AlertLevel(1, "Alert Level 1", 1.0, "cyanobacteria established"),
                AlertLevel(2, "Alert Level 2", 12.0, "toxin concentrations may exceed guideline values"),
            ),
        ),
        Framework(
            id="who-2021-recreation",
            title="WHO alert-levels framework for recreational waters (2021)",
            source=("Chorus & Welker (eds.), Toxic Cyanobacteria in Water, 2nd ed., 2021, ch. 5: "
                    "Alert Level 1 at about 10 µg/L, Alert Level 2 at about 24 µg/L chlorophyll-a."),
            note="Values from memory (docs/references.md).",
            levels=(
                AlertLevel(1, "Alert Level 1", 10.0, "advise users; increase monitoring"),
                AlertLevel(2, "Alert Level 2", 24.0, "advise against contact; consider closure"),
            ),
        ),
    )
}
