"""Bloomline's invented demo scenario: one season of feeds and the truth behind them.

Two fictional water bodies near one weather station (Corrisdale Reservoir with
three basins in a chain, and Sorrel Lake). Modules, one job each:

* ``setting``: season calendar, basins, gauges and the hydraulic chain;
* ``randomness``: per-component seeded generators and AR(1) noise;
* ``weather``: truth weather, storms, 7-day forecasts, 15-minute forcing;
* ``inflows``: daily gauge discharge and nutrients, 15-minute forcing;
* ``truth``: the truth box model (not Bloomline's model);
* ``sensors``: buoy readings with noise, spikes, gaps, outages and fouling;
* ``buoy_files``: the buoy CSV files with duplicates and one malformed file;
* ``lab``: weekly lab samples;
* ``summary``: daily truth means, the printed summary, the optional plot;
* ``formatting`` and ``writers``: how the other files are written;
* ``season``: ``generate``, which runs all of the above for one seed.
"""
from .season import generate

__all__ = ["generate"]
