"""Unit conversions to Bloomline's canonical units."""

from __future__ import annotations

import numpy as np
import pytest

from monitor.config import Calibration
from monitor.ingest.units import UnitError, conversion, normalize_unit, to_canonical


@pytest.mark.parametrize("unit, value, expected", [
    ("ug/L", 3.0, 3.0),
    ("µg/L", 3.0, 3.0),
    ("μg/l", 3.0, 3.0),  # Greek mu, not the micro sign
    ("ug L-1", 3.0, 3.0),
    ("ppb", 3.0, 3.0),  # 1 ppb = 1 µg/kg ≈ 1 µg/L in fresh water (common practice)
    ("mg/L", 0.25, 250.0),
    ("mg/m3", 7.0, 7.0),
])
def test_concentrations_convert_to_micrograms_per_litre(unit, value, expected):
    assert to_canonical([value], "chlorophyll_a", unit)[0] == pytest.approx(expected)


def test_nitrate_as_n_and_as_nitrate_ion():
    # mg/L as N → µg N/L by the factor 1000 (definition of the prefixes)
    assert to_canonical([0.5], "nitrate", "mg/L as N")[0] == pytest.approx(500.0)
    # 10 mg/L as NO3⁻ = 2.259 mg/L as N (molar masses N 14.007, NO3 62.004; IUPAC atomic weights)
    assert to_canonical([10.0], "nitrate", "mg/L as NO3")[0] == pytest.approx(2259.0, rel=1e-3)


def test_phosphate_ion_converts_to_phosphorus():
    # 1 mg/L PO4³⁻ = 0.3261 mg/L P (P 30.974, PO4 94.971; IUPAC atomic weights)
    assert to_canonical([1.0], "srp", "mg/L as PO4")[0] == pytest.approx(326.1, rel=1e-3)


@pytest.mark.parametrize("unit, value, expected", [
    ("°F", 32.0, 0.0), ("degF", 212.0, 100.0), ("F", 68.0, 20.0),  # Fahrenheit scale definition
    ("K", 273.15, 0.0), ("°C", 21.5, 21.5), ("degC", -1.0, -1.0),
])
def test_temperature_scales(unit, value, expected):
    assert to_canonical([value], "water_temperature", unit)[0] == pytest.approx(expected, abs=1e-12)


def test_feet_cfs_and_wind_units_use_exact_definitions():
    # international foot = 0.3048 m exactly (1959 agreement); cfs = 0.3048³ m³/s
    assert to_canonical([10.0], "secchi_depth", "ft")[0] == pytest.approx(3.048)
    assert to_canonical([100.0], "discharge", "cfs")[0] == pytest.approx(2.8316846592)
    assert to_canonical([36.0], "wind_speed", "km/h")[0] == pytest.approx(10.0)
    assert to_canonical([1.0], "wind_speed", "knots")[0] == pytest.approx(1852.0 / 3600.0)
    assert to_canonical([1.0], "wind_speed", "mph")[0] == pytest.approx(0.44704)


def test_rfu_converts_through_the_station_calibration():
    cal = {"phycocyanin": Calibration(unit="RFU", slope=2.5, intercept=-0.5)}
    np.testing.assert_allclose(to_canonical([1.0, 2.0], "phycocyanin", "rfu", cal), [2.0, 4.5])


def test_rfu_without_calibration_is_rejected_with_a_hint():
    with pytest.raises(UnitError, match="unknown unit 'RFU' for phycocyanin.*needs a calibration"):
        conversion("phycocyanin", "RFU")


def test_unknown_unit_names_what_is_accepted():
    with pytest.raises(UnitError, match=r"unknown unit 'furlongs' for secchi_depth; expected m, cm, mm, ft, in$"):
        conversion("secchi_depth", "furlongs")


def test_unknown_unit_lists_the_spellings_people_write():
    with pytest.raises(UnitError, match=r"expected ug/L N, mg/L N, ug/L NO3, mg/L NO3, ug/L, mg/L, ppb, ppm$"):
        conversion("nitrate", "furlongs")
    with pytest.raises(UnitError, match=r"expected ug/L P, mg/L P, ug/L PO4, mg/L PO4, ug/L, mg/L, ppb, ppm$"):
        conversion("srp", "mmol/L")


def test_unknown_variable_is_rejected():
    with pytest.raises(UnitError, match="unknown variable 'salinity'"):
        conversion("salinity", "PSU")


def test_temperature_unit_is_not_accepted_for_a_concentration():
    with pytest.raises(UnitError, match="unknown unit 'degC' for nitrate"):
        conversion("nitrate", "degC")


def test_normalize_unit_spellings():
    assert normalize_unit(" µg / L ") == "ug/l"
    assert normalize_unit("m³/s") == "m3/s"
    assert normalize_unit("W m-2") == "w/m2"
