"""Unit parsing: round trips, gauge versus absolute, offset temperatures, wrong dimensions."""

import pytest

from estimator.errors import InputError
from estimator.units import Q_, parse_pressure, parse_quantity, quantity_from_json, quantity_to_json


@pytest.mark.parametrize(
    "text,dim,unit,value",
    [
        ("2 L/min", "flow", "mL/min", 2000.0),
        ("70 kg", "mass", "kg", 70.0),
        ("2 %", "fraction", "dimensionless", 0.02),
        ("137 bar", "pressure", "kPa", 13700.0),
        ("55 years", "age", "year", 55.0),
        ("15 degC", "temperature", "K", 288.15),
        ("3000 m", "length", "km", 3.0),
        ("12 /min", "rate", "1/min", 12.0),
    ],
)
def test_parse_user_strings(text, dim, unit, value):
    # Conversion factors are SI definitions (BIPM SI Brochure, 9th ed., 2019).
    assert parse_quantity(text, "field", dim).to(unit).magnitude == pytest.approx(value, rel=1e-12)


def test_wrong_dimension_names_field_value_and_dimension():
    with pytest.raises(InputError) as err:
        parse_quantity("6 L", "phases[0].oxygen", "flow")
    msg = str(err.value)
    assert "phases[0].oxygen" in msg and "'6 L'" in msg and "flow" in msg and "volume" in msg


def test_gauge_is_never_bar_times_gram():
    r = parse_pressure("137 bar(g)", "cylinder.pressure")
    assert r.reference == "gauge"
    assert r.quantity.check("[pressure]")
    # Absolute = gauge + standard atmosphere (1.01325 bar, ISO 2533).
    assert r.absolute().to("bar").magnitude == pytest.approx(138.01325)
    assert parse_pressure("137 barg", "p").reference == "gauge"
    assert parse_pressure("1 bar(a)", "p").reference == "absolute"
    assert parse_pressure("14.7 psia", "p").reference == "absolute"
    with pytest.raises(InputError):
        parse_quantity("137 bar*g", "p", "pressure")


def test_offset_temperature_round_trip():
    t = parse_quantity("15 degC", "t", "temperature")
    assert t.to("degF").magnitude == pytest.approx(59.0)
    assert quantity_from_json(quantity_to_json(t)).to("K").magnitude == pytest.approx(288.15)


@pytest.mark.parametrize("q", [Q_(2.5, "L/min"), Q_(70, "kg"), Q_(0.3, "dimensionless"), Q_(1.2, "MAC")])
def test_json_round_trip(q):
    back = quantity_from_json(quantity_to_json(q))
    assert back.units == q.units and back.magnitude == pytest.approx(q.magnitude)


def test_bad_json_quantity():
    with pytest.raises(InputError):
        quantity_from_json({"magnitude": 1, "units": "furlong_per_nothing"}, "x")
