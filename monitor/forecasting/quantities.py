"""The quantities a forecast run stores per basin and day, with their units.

The cycle (:mod:`monitor.forecasting.cycle`) computes exactly these, the
store's read queries (:mod:`monitor.store.status`) and the API offer them.
"""

from __future__ import annotations

#: Forecast quantities, in the order they are computed and listed.
QUANTITIES = ("cyanobacteria_chlorophyll", "total_chlorophyll", "nitrogen", "phosphorus")

#: Unit of each quantity, in ASCII for CSV and JSON: chlorophyll-a of the cyanobacteria
#: group and of all groups; the model's dissolved inorganic nitrogen as N and soluble
#: reactive phosphorus as P (``assimilation.spec``).
UNITS = {"cyanobacteria_chlorophyll": "ug/L", "total_chlorophyll": "ug/L", "nitrogen": "ug N/L",
         "phosphorus": "ug P/L"}
