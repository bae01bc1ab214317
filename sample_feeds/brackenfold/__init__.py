"""Brackenfold Mere: Bloomline's second invented scenario, whose truth is not Bloomline's model.

A small closed-basin lake monitored the way such lakes usually are: one
sampling site with a daily lab chlorophyll-a, a daily-mean temperature logger
and weekly nutrients, exported as one long CSV per year. Two seasons (2025
moderate, 2026 fertilised into a bloom). Modules, one job each:

* ``setting``: the lake, its site and the two seasons;
* ``forcing``: daily weather, storms, stratification and deep-water anoxia;
* ``truth``: the nutrient–phytoplankton–zooplankton truth model (scipy ``solve_ivp``);
* ``sampling``: the lab and logger records with their errors and gaps;
* ``summary``: daily truth means, the clear-water phase, the printed summary;
* ``writers``: the export and truth files;
* ``season``: ``generate``, which runs all of the above for one seed.
"""
from .season import generate

__all__ = ["generate"]
