"""Write the onboarding dataset of Tallowmere Pond, an invented small lake known only from lab records.

Everything is fictional: the pond, its site and every number. The file is
shaped like the records a new user brings: one long CSV (time, site,
variable, value, unit) with

* a daily extracted chlorophyll-a sample and a daily-mean water temperature,
  both dated by day only (``2026-06-03``);
* weekly nutrients (nitrate + nitrite, ammonium, SRP, total phosphorus)
  with annotated units (``ug/L N (nitrate+nitrite)``) and blank-corrected
  negative values where a sample was below detection;
* weekly pH, dissolved oxygen and oxygen saturation;
* no weather and no inflow.

The values follow a smooth invented season (a warm-water chlorophyll peak
in late July) with seeded noise; they are not the output of Bloomline's
model. Run ``python sample_feeds/onboarding/generate_onboarding.py --seed
20260401``; the same seed writes the same bytes.
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
SITE = "TM-1"
FIRST_DAY = dt.date(2026, 4, 1)
LAST_DAY = dt.date(2026, 10, 31)
NUTRIENT_WEEKDAY = 1  # Tuesdays


def water_temperature_C(doy: float) -> float:
    """An invented seasonal daily-mean surface temperature [°C], peaking near 23 °C in late July."""
    return 13.0 + 10.0 * math.cos(2 * math.pi * (doy - 205) / 365.0)


def chlorophyll_ugL(doy: float) -> float:
    """An invented seasonal chlorophyll-a [µg/L]: a spring level near 6 rising to about 30 in late July."""
    return 6.0 + 24.0 * math.exp(-0.5 * ((doy - 208) / 22.0) ** 2)


def rows(seed: int) -> list[tuple[str, str, str, str, str]]:
    """(time, site, variable, value, unit) rows of the season, in date order."""
    rng = np.random.default_rng(seed)
    out = []
    day = FIRST_DAY
    while day <= LAST_DAY:
        doy = day.timetuple().tm_yday
        date = day.isoformat()
        temp = water_temperature_C(doy) + rng.normal(0.0, 0.6)
        chl = chlorophyll_ugL(doy) * math.exp(rng.normal(0.0, 0.2))
        out.append((date, SITE, "chlorophyll_a", f"{chl:.2f}", "ug/L (extracted; lab)"))
        out.append((date, SITE, "water_temperature", f"{temp:.2f}", "degC"))
        if day.weekday() == NUTRIENT_WEEKDAY:
            # blank-corrected lab values: a sample below detection can come out negative
            nitrate = 180.0 * math.exp(-((doy - 120) / 90.0) ** 2) + rng.normal(0.0, 6.0) - 8.0
            ammonium = 10.0 + rng.normal(0.0, 8.0)
            srp = 6.0 + 4.0 * math.sin(2 * math.pi * (doy - 150) / 365.0) + rng.normal(0.0, 3.0)
            tp = 35.0 + 0.8 * chlorophyll_ugL(doy) + rng.normal(0.0, 4.0)
            out.append((date, SITE, "nitrate", f"{nitrate:.1f}", "ug/L N (nitrate+nitrite)"))
            out.append((date, SITE, "ammonium", f"{ammonium:.1f}", "ug/L N"))
            out.append((date, SITE, "srp", f"{srp:.1f}", "ug/L P (filtered)"))
            out.append((date, SITE, "total_phosphorus", f"{tp:.1f}", "ug/L P"))
            out.append((date, SITE, "ph", f"{8.0 + 0.03 * chlorophyll_ugL(doy) + rng.normal(0, 0.1):.2f}", "pH"))
            do = 14.6 - 0.39 * water_temperature_C(doy) + rng.normal(0.0, 0.4)
            out.append((date, SITE, "dissolved_oxygen", f"{do:.2f}", "mg/L"))
            out.append((date, SITE, "oxygen_saturation", f"{do / (14.6 - 0.39 * temp) * 100:.0f}", "%"))
        day += dt.timedelta(days=1)
    return out


def write(seed: int, folder: Path = HERE / "data") -> Path:
    """Write the season's CSV into ``folder``; returns its path."""
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "tallowmere_2026.csv"
    lines = ["time,site,variable,value,unit"] + [",".join(f'"{c}"' if "," in c else c for c in r)
                                                  for r in rows(seed)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8", newline="\n")
    return path


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=20260401)
    args = parser.parse_args()
    print(write(args.seed))


if __name__ == "__main__":
    main()
