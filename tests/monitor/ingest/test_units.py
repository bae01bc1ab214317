"""Unit conversions to Bloomline's canonical units."""

from __future__ import annotations

import numpy as np
import pytest

from monitor.config import Calibration
from monitor.ingest.units import Resolved, UnitError, conversion, normalize_unit, resolve, to_canonical


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


@pytest.mark.parametrize("variable, unit, value, expected, read_as", [
    ("nitrate", "ug/L N (nitrate+nitrite)", 120.0, 120.0, "ug/L N"),
    ("chlorophyll_a", "ug/L (extracted; lab)", 7.5, 7.5, "ug/L"),
    ("wind_speed", "m/s (assumed)", 3.0, 3.0, "m/s"),
    ("srp", "mg/L P (filtered (0.45 um))", 0.004, 4.0, "mg/L P"),  # nested annotations
    ("water_temperature", "°F (logger)", 68.0, 20.0, "°F"),
])
def test_an_annotation_in_parentheses_is_ignored_where_the_rest_is_a_known_unit(variable, unit, value, expected,
                                                                                  read_as):
    r = resolve(variable, unit)
    assert r.scale * value + r.offset == pytest.approx(expected)
    assert r.read_as == read_as


def test_a_chemical_form_in_parentheses_belongs_to_the_unit():
    # mg/L as N → µg N/L × 1000; as NO3⁻ × 14.007/62.004 (IUPAC atomic weights)
    assert conversion("nitrate", "mg/L (as N)") == (pytest.approx(1000.0), 0.0)
    assert conversion("nitrate", "mg/L (NO3)")[0] == pytest.approx(1000.0 * 14.007 / 62.004)
    # a parenthesised form that does not fit the variable is not dropped as if it were an annotation
    with pytest.raises(UnitError, match=r"unknown unit 'ug/L \(as NO3\)' \(read as 'ug/L as no3' without the "
                                        r"annotation in parentheses\) for srp; expected ug/L P"):
        conversion("srp", "ug/L (as NO3)")


def test_annotations_are_no_way_around_an_unknown_unit():
    with pytest.raises(UnitError, match=r"unknown unit 'furlongs \(approx\.\)' \(read as 'furlongs' without the "
                                        r"annotation in parentheses\) for secchi_depth; expected m, cm, mm, ft, in"):
        conversion("secchi_depth", "furlongs (approx.)")


def test_a_feeds_unit_map_reads_its_own_spellings_as_known_units():
    unit_map = {"NOx-N ppb": "ug/L N", "mgP/L (TP, unfiltered)": "mg/L P"}
    assert resolve("nitrate", "noX-n  PPB", unit_map=unit_map) == Resolved(1.0, 0.0)  # matched normalised
    assert resolve("total_phosphorus", "mgP/L (TP, unfiltered)", unit_map=unit_map).scale == pytest.approx(1000.0)
    with pytest.raises(UnitError, match="unknown unit 'NOx-N ppb' for water_temperature"):
        resolve("water_temperature", "NOx-N ppb")


@pytest.mark.parametrize("variable, unit, value, expected", [
    # NH4⁺ as N: × 14.007/18.038 (N 14.007, H 1.008; IUPAC atomic weights)
    ("ammonium", "mg/L NH4", 1.0, 1000.0 * 14.007 / 18.038),
    ("ammonium", "mg/L NH4-N", 0.05, 50.0),
    ("total_nitrogen", "mg N/L", 0.8, 800.0),
    # dissolved O2: 1 µmol/L = 31.998 µg/L (O 15.999; IUPAC atomic weights)
    ("dissolved_oxygen", "umol/L", 250.0, 250.0 * 31.998e-3),
    ("dissolved_oxygen", "mg/L", 8.2, 8.2),
    ("oxygen_saturation", "% sat", 104.0, 104.0),
    ("ph", "-", 8.1, 8.1), ("ph", "", 8.1, 8.1), ("ph", "pH units", 8.1, 8.1),
    ("turbidity", "FNU", 12.0, 12.0),  # FNU taken as NTU (common practice; ISO 7027 vs EPA 180.1 differ)
    # 1 S/m = 10 mS/cm = 10⁴ µS/cm (SI prefixes); 1 mho = 1 S
    ("specific_conductance", "mS/cm", 0.45, 450.0), ("specific_conductance", "S/m", 0.045, 450.0),
    ("specific_conductance", "µmho/cm", 450.0, 450.0), ("specific_conductance", "uS cm-1", 450.0, 450.0),
])
def test_the_new_variables_convert_to_their_canonical_units(variable, unit, value, expected):
    assert to_canonical([value], variable, unit)[0] == pytest.approx(expected)
