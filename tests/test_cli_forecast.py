"""``lowflow forecast``: JSON contract, human output, options and errors."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from estimator.cli import CAUTION, main

DATA = Path(__file__).parent / "data"
MIX = DATA / "casemix_department.toml"


def _run(capsys, *args):
    with pytest.raises(SystemExit) as exc:
        main(["forecast", *map(str, args)])
    out = capsys.readouterr()
    return exc.value.code, out.out, out.err


def test_json_contract(capsys):
    code, out, _ = _run(capsys, MIX, "--weeks", 12, "--seed", 5, "--json")
    assert code == 0
    doc = json.loads(out)
    for key in (
        "weeks",
        "seed",
        "items",
        "orders",
        "warnings",
        "gas_volume_reference",
        "cost",
        "cases",
        "cover",
        "co2e_basis",
        "solver",
    ):
        assert key in doc, key
    assert doc["weeks"] == 12 and doc["seed"] == 5
    assert doc["gas_volume_reference"].startswith("free gas at 15 degC and 101.325 kPa")
    for name in ("oxygen", "air", "nitrous_oxide", "sevoflurane", "sevoflurane_bottles", "absorbent", "co2e"):
        item = doc["items"][name]
        assert set(item) == {"mean", "p50", "p95", "p99"}
        assert set(item["p95"]) == {"magnitude", "units"}
    assert doc["items"]["oxygen"]["p95"]["units"] in ("l", "L", "liter")
    assert doc["items"]["nitrous_oxide"]["mean"]["units"] in ("kg", "kilogram")
    order = doc["orders"][0]
    assert {"item", "unit", "covers", "need", "per_unit", "count"} <= set(order)
    assert all({"code", "message"} == set(w) for w in doc["warnings"])


def test_same_seed_same_output(capsys):
    a = _run(capsys, MIX, "--weeks", 5, "--seed", 2, "--json")[1]
    b = _run(capsys, MIX, "--weeks", 5, "--seed", 2, "--json")[1]
    da, db = json.loads(a), json.loads(b)
    da.pop("solver"), db.pop("solver")
    assert da == db


def test_human_output_ends_with_caution(capsys):
    code, out, _ = _run(capsys, MIX, "--weeks", 4)
    assert code == 0
    assert out.rstrip().endswith(CAUTION)
    assert "P95" in out and "oxygen" in out and "Orders that cover a P95 week" in out


def test_csv_file(capsys, tmp_path):
    p = tmp_path / "mix.csv"
    p.write_text("name,per_week,agent,duration [min],weight_mean [kg]\nshort list,3,isoflurane,30,70\n")
    code, out, _ = _run(capsys, p, "--weeks", 3, "--seed", 1, "--json")
    assert code == 0
    assert json.loads(out)["cases"][0]["name"] == "short list"


def test_errors_are_one_line_with_status_2(capsys, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(
        '[[case_types]]\nname = "x"\nper_week = 2\nagent = "sevoflurane"\nweight_mean = "70 kg"\n'
        'duration_median = "60 min"\nduration_p90 = "30 min"\n'
    )
    code, _, err = _run(capsys, bad)
    assert code == 2
    assert err.count("\n") == 1 and "case_types[0].duration_p90" in err
    code, _, err = _run(capsys, MIX, "--weeks", 0)
    assert code == 2 and "weeks" in err
    code, _, err = _run(capsys, tmp_path / "none.toml")
    assert code == 2 and err.count("\n") == 1


TEN_MILLION = """
weeks = 1000
[[case_types]]
name = "every theatre in the country"
per_week = 10000
agent = "sevoflurane"
duration = "240 min"
weight_mean = "75 kg"
"""


def test_a_huge_forecast_is_refused_before_it_runs_with_an_estimate(capsys, tmp_path):
    # Before: 10 million cases ran for about half an hour with no word. Now the expected count and
    # run time are stated and the run is refused above the limit.
    path = tmp_path / "huge.toml"
    path.write_text(TEN_MILLION)
    code, out, err = _run(capsys, path)
    assert code == 2 and "forecast cases" in err and "10000000" in err and "--max-cases" in err
    assert " min" in err  # the estimated run time
    code, _, err = _run(capsys, path, "--max-cases", 10**9)
    assert code == 2 and "--max-cases" in err


def test_a_small_limit_refuses_and_a_long_run_announces_itself(capsys, monkeypatch):
    from estimator.planning import forecast_size

    code, _, err = _run(capsys, MIX, "--weeks", 10, "--max-cases", 5)
    assert code == 2 and "at most 5 expected cases" in err
    monkeypatch.setattr(forecast_size, "CASE_HOURS_PER_SECOND", 1.0)  # as if the machine were slow
    code, out, err = _run(capsys, MIX, "--weeks", 2, "--seed", 1, "--json")
    assert code == 0 and err.startswith("Simulating about") and json.loads(out)["weeks"] == 2
