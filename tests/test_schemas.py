"""Published file formats: the JSON Schemas accept every demo file, refuse what the loaders refuse,
and the committed copies in docs/schemas/ are those the code makes (consistency checks)."""

from __future__ import annotations

import datetime as dt
import json
import tomllib
from pathlib import Path

import pytest

from estimator.inputs.schemas import KINDS, json_schema

jsonschema = pytest.importorskip("jsonschema")
ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_cases"
KIND_OF = {
    "highland_clinic_inventory.toml": "inventory",
    "kestrel_case_mix.toml": "case-mix",
    "kestrel_prices.toml": "prices",
    "kestrel_lowflow_policy.toml": "policy",
}


def as_json(value):
    """TOML values as a JSON editor holds them (dates as ISO text)."""
    if isinstance(value, dict):
        return {k: as_json(v) for k, v in value.items()}
    if isinstance(value, list):
        return [as_json(v) for v in value]
    if isinstance(value, dt.date | dt.datetime | dt.time):
        return value.isoformat()
    return value


def validator(kind: str):
    return jsonschema.Draft202012Validator(json_schema(kind))


@pytest.mark.parametrize("name", sorted(p.name for p in DEMO.glob("*.toml")))
def test_every_demo_file_is_valid_under_its_schema(name):
    data = as_json(tomllib.loads((DEMO / name).read_text(encoding="utf-8")))
    errors = [e.message for e in validator(KIND_OF.get(name, "scenario")).iter_errors(data)]
    assert errors == [], errors[:3]


def test_schema_refuses_a_misspelt_key_as_the_loader_does():
    data = as_json(tomllib.loads((DEMO / "kestrel_lap_chole.toml").read_text(encoding="utf-8")))
    data["patient"]["wieght"] = "70 kg"
    assert not validator("scenario").is_valid(data)


def test_quantity_fields_carry_unit_and_range():
    weight = json_schema("scenario")["$defs"]["PatientInput"]["properties"]["weight"]
    assert weight["x-unit"] == "kg" and weight["x-range"] == [0.5, 300.0] and weight["x-dimension"] == "mass"


@pytest.mark.parametrize("kind", sorted(KINDS))
def test_committed_schema_is_the_generated_one(kind):
    # docs/schemas/KIND.schema.json is written by `lowflow schema KIND`; regenerate it after a
    # contract change: for k in scenario inventory case-mix prices policy; do uv run lowflow schema $k
    # > docs/schemas/$k.schema.json; done
    committed = json.loads((ROOT / "docs" / "schemas" / f"{kind}.schema.json").read_text(encoding="utf-8"))
    assert committed == json_schema(kind)
