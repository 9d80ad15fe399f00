"""The sourced data loader: bad records are refused, and every shipped value has a source."""

import re
import tomllib
from importlib import resources

import pint
import pytest

from estimator.errors import InputError
from estimator.properties import (
    AGENTS,
    CONFIDENCE_CODES,
    GASES,
    DataError,
    agent,
    gas,
    source_table,
    validate_records,
)

GOOD = """
[sources]
book = "A reference book, 2000"
[agents.testane]
kind = "volatile"
molar_mass = { value = "100.0 g/mol", source = "book", confidence = "V" }
mac40 = { value = "1.5 %", source = "book", confidence = "M", note = "example" }
blood_gas = { value = 0.5, source = "book", confidence = "D" }
"""


def doc(extra: str) -> dict:
    return tomllib.loads(GOOD + extra)


def test_good_document_loads_with_units():
    recs = validate_records(doc(""))["testane"]
    assert recs["molar_mass"].value.to("kg/mol").magnitude == pytest.approx(0.1)
    # "%" is percent (1/100, SI Brochure 9th ed.).
    assert recs["mac40"].value.to("dimensionless").magnitude == pytest.approx(0.015)
    assert recs["blood_gas"].value == 0.5 and recs["mac40"].note == "example"


@pytest.mark.parametrize(
    "line,message",
    [
        ('density = { value = "1.5 g/mL", confidence = "V" }', "no source"),
        ('density = { value = "1.5 g/mL", source = "", confidence = "V" }', "no source"),
        ('density = { value = "1.5 g/mL", source = "nowhere", confidence = "V" }', "unknown source"),
        ('density = { value = "1.5 g/mL", source = "book", confidence = "X" }', "confidence"),
        ('density = { value = "1.5 g/mL", source = "book" }', "confidence"),
        ('density = { value = "1.5 blargs", source = "book", confidence = "V" }', "unparsable"),
        ('density = { value = "one g/mL", source = "book", confidence = "V" }', "unparsable"),
        ('density = { value = true, source = "book", confidence = "V" }', "number or a unit"),
        ('density = "1.5 g/mL"', "expected"),
        ('density = { value = "1.5 g/mL", source = "book", confidence = "V", by = "me" }', "unknown keys"),
    ],
)
def test_bad_records_are_refused(line, message):
    with pytest.raises(DataError, match=message):
        validate_records(doc(line + "\n"))


def test_bad_record_in_gases_section_is_refused():
    with pytest.raises(DataError, match="unknown source"):
        validate_records(doc('[gases.testgas]\nmolar_mass = { value = "4 g/mol", source = "x", confidence = "V" }\n'))


def test_every_shipped_value_has_a_known_source_and_code():
    # Read the shipped file directly, not through the loader under test.
    data = tomllib.loads(resources.files("estimator").joinpath("data/agents.toml").read_text(encoding="utf-8"))
    count = 0
    for section in ("agents", "gases", "physiology"):
        for name, props in data[section].items():
            for prop, raw in props.items():
                if prop in ("kind", "formula"):
                    continue
                assert raw["source"] in data["sources"], (name, prop)
                assert data["sources"][raw["source"]].strip(), (name, prop)
                assert raw["confidence"] in CONFIDENCE_CODES, (name, prop)
                count += 1
    physiology = sum(len(t) for t in data["physiology"].values())
    assert count == sum(len(s.records) for s in (*AGENTS.values(), *GASES.values())) + physiology
    rows = source_table()
    assert len(rows) == count and all(r["source"] for r in rows)


def test_shipped_units_have_the_right_dimensions():
    for sp in AGENTS.values():
        assert sp.molar_mass.check("[mass] / [substance]")
        assert sp.liquid_density.check("[mass] / [length] ** 3")
        assert sp.mac40.check("[]") and 0 < sp.mac40.to("").magnitude < 0.1
        assert isinstance(sp.vapour_pressure_20c, pint.Quantity) and sp.vapour_pressure_20c.check("[pressure]")


@pytest.mark.parametrize(
    "name,mw", [("sevoflurane", 200.05), ("isoflurane", 184.49), ("desflurane", 168.04), ("halothane", 197.38)]
)
def test_molar_masses_from_formula(name, mw):
    # IUPAC 2013 standard atomic weights (abridged, from memory): C 12.011, H 1.008, F 18.998,
    # O 15.999, Cl 35.45, Br 79.904. Sum over the formula in the data file; rel 1e-3 covers
    # the rounding of the tabulated molar masses.
    weights = {"C": 12.011, "H": 1.008, "F": 18.998, "O": 15.999, "Cl": 35.45, "Br": 79.904}
    total = sum(weights[el] * int(n or 1) for el, n in re.findall(r"([A-Z][a-z]?)(\d*)", agent(name).formula))
    assert total == pytest.approx(mw, rel=1e-3)
    assert agent(name).molar_mass.to("g/mol").magnitude == pytest.approx(total, rel=1e-3)


def test_lookup_errors_name_the_choices():
    with pytest.raises(InputError, match="desflurane, halothane, isoflurane, sevoflurane"):
        agent("ether")
    assert gas("N2O").name == "nitrous_oxide"
    with pytest.raises(InputError, match="oxygen"):
        gas("helium")
