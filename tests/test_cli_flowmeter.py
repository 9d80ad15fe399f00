"""``lowflow flowmeter``: JSON contract, human output, and one-line errors with exit status 2."""

import json
import math

import pytest

from estimator.cli import CAUTION, main


def run(capsys, *args):
    with pytest.raises(SystemExit) as exc:
        main(["flowmeter", *args])
    out = capsys.readouterr()
    return exc.value.code, out.out, out.err


def test_json_keys_and_values(capsys):
    code, out, _ = run(
        capsys,
        "--reading",
        "10 L/min",
        "--calibrated-for",
        "oxygen",
        "--gas",
        "oxygen",
        "--elevation",
        "3000 m",
        "--json",
    )
    assert code in (0, None)
    d = json.loads(out)
    for key in (
        "true_flow_ambient",
        "true_flow_standard",
        "regime",
        "uncertainty",
        "reynolds",
        "site",
        "warnings",
        "gas_volume_reference",
    ):
        assert key in d
    assert set(d["uncertainty"]) == {"low", "high"}
    assert d["true_flow_ambient"]["units"] == "liter / minute"
    assert set(d["site"]) >= {"pressure", "temperature"}
    # ISO 2533 at 3000 m: 70.12 kPa (tests/test_site.py); high range reads low by about
    # sqrt(p0/p) = 1.202 (common practice, no source): 2 % for the viscous remainder at 10 L/min.
    assert d["site"]["pressure"]["magnitude"] == pytest.approx(70.12, abs=0.01)
    assert d["true_flow_ambient"]["magnitude"] / 10 == pytest.approx(math.sqrt(101.325 / 70.121), rel=0.02)
    assert d["regime"] == "turbulent"
    assert d["gas_volume_reference"].startswith("free gas at 15 degC")


def test_concentrator_with_purity_and_pressure(capsys):
    code, out, _ = run(
        capsys,
        "--reading",
        "5 L/min",
        "--calibrated-for",
        "oxygen",
        "--gas",
        "concentrator",
        "--ambient-pressure",
        "70 kPa",
        "--temperature",
        "30 degC",
        "--purity",
        "93 %",
        "--json",
    )
    d = json.loads(out)
    assert d["composition"]["oxygen"] == pytest.approx(0.93)
    assert d["site"]["temperature"]["magnitude"] == pytest.approx(30.0)
    assert "FLOWMETER_OTHER_GAS" in [w["code"] for w in d["warnings"]]


def test_human_output_ends_with_caution(capsys):
    code, out, _ = run(
        capsys, "--reading", "0.5 L/min", "--calibrated-for", "air", "--gas", "oxygen=30 %, nitrous_oxide=70 %"
    )
    assert code in (0, None)
    assert "true flow" in out and "regime:" in out
    assert out.strip().endswith(CAUTION)


@pytest.mark.parametrize(
    "args,needle",
    [
        (["--elevation", "12000 m"], "--elevation"),
        (["--gas", "concentrator", "--purity", "99 %"], "--purity"),
        (["--gas", "xenon"], "--gas"),
        (["--elevation", "3000 m", "--ambient-pressure", "101 kPa"], "--ambient-pressure"),
        (["--reading", "-2 L/min"], "--reading"),
    ],
)
def test_errors_are_one_line_exit_2(capsys, args, needle):
    base = {"--reading": "2 L/min", "--calibrated-for": "oxygen"}
    extra = dict(zip(args[::2], args[1::2], strict=True))
    base.update(extra)
    code, out, err = run(capsys, *[x for kv in base.items() for x in kv])
    assert code == 2 and out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and needle in lines[0] and "expected" in lines[0]
