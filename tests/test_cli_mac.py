"""``lowflow mac``: JSON keys and values, human output, one-line errors with exit status 2."""

import json
import subprocess
import sys
from importlib import metadata

import pytest

from estimator import __version__
from estimator.cli import CAUTION, main


def run(args, capsys):
    with pytest.raises(SystemExit) as ex:
        main(args)
    out, err = capsys.readouterr()
    return ex.value.code or 0, out, err


def test_json_keys_and_values(capsys):
    code, out, err = run(["mac", "--agent", "sevoflurane", "--age", "70", "--json"], capsys)
    assert code == 0 and err == ""
    doc = json.loads(out)
    for key in ("mac", "end_tidal_for_total", "agent", "age", "nitrous_oxide_mac_fraction", "warnings", "source"):
        assert key in doc
    # Mapleson 1996: 1.80 % x 10^(-0.00269 x 30) = 1.4948 % at 70 years (Table 2 and formula).
    assert doc["mac"]["units"] == "percent"
    assert doc["mac"]["magnitude"] == pytest.approx(1.80 * 10 ** (-0.00269 * 30), rel=1e-12)
    assert doc["end_tidal_for_total"] is None
    assert doc["agent"] == "sevoflurane"
    assert doc["age"] == {"magnitude": 70.0, "units": "year"}
    assert doc["nitrous_oxide_mac_fraction"] == {"magnitude": 0.0, "units": "MAC"}
    assert doc["warnings"] == [] and "Mapleson" in doc["source"]


def test_json_total_with_nitrous_oxide(capsys):
    code, out, _ = run(
        [
            "mac",
            "--agent",
            "isoflurane",
            "--age",
            "70 years",
            "--nitrous-oxide",
            "67 %",
            "--total-mac",
            "1.2",
            "--json",
        ],
        capsys,
    )
    assert code == 0
    doc = json.loads(out)
    # Nickalls and Mapleson 2003 additivity with Mapleson 1996 MACs written out: nitrous oxide
    # 67 / (104 f), isoflurane (1.2 - that) x 1.17 f, f = 10^(-0.00269 x 30). Round-off only.
    f = 10 ** (-0.00269 * 30)
    n2o = 0.67 / (1.04 * f)
    assert doc["nitrous_oxide_mac_fraction"]["magnitude"] == pytest.approx(n2o, rel=1e-12)
    assert doc["end_tidal_for_total"]["units"] == "percent"
    assert doc["end_tidal_for_total"]["magnitude"] == pytest.approx((1.2 - n2o) * 1.17 * f, rel=1e-12)


def test_json_total_not_reachable_is_null_with_warning(capsys):
    code, out, _ = run(
        ["mac", "--agent", "sevoflurane", "--age", "40", "--nitrous-oxide", "70 %", "--total-mac", "0.5", "--json"],
        capsys,
    )
    doc = json.loads(out)
    assert code == 0 and doc["end_tidal_for_total"] is None
    assert [w["code"] for w in doc["warnings"]] == ["NITROUS_OXIDE_EXCEEDS_TOTAL"]


def test_human_output_ends_with_caution(capsys):
    code, out, _ = run(["mac", "--agent", "desflurane", "--age", "0.5", "--total-mac", "1"], capsys)
    assert code == 0
    assert "desflurane" in out and "AGE_BELOW_MAPLESON_RANGE" in out
    assert out.rstrip().endswith(CAUTION)


@pytest.mark.parametrize(
    "args,field",
    [
        (["--agent", "ether", "--age", "40"], "--agent"),
        (["--agent", "sevoflurane", "--age", "-3"], "--age"),
        (["--agent", "sevoflurane", "--age", "40 kg"], "--age"),
        (["--agent", "sevoflurane", "--age", "40", "--nitrous-oxide", "150 %"], "--nitrous-oxide"),
        (["--agent", "sevoflurane", "--age", "40", "--total-mac", "9"], "--total-mac"),
        (["--agent", "sevoflurane", "--age", "40", "--ambient-pressure", "2 kPa"], "--ambient-pressure"),
        (["--agent", "sevoflurane", "--age", "40", "--elevation", "20000 m"], "--elevation"),
    ],
)
def test_errors_are_one_line_naming_the_field(args, field, capsys):
    code, out, err = run(["mac", *args], capsys)
    assert code == 2 and out == ""
    lines = err.strip().splitlines()
    # Our errors say "expected ..."; a choice (--agent) is typer's "is not one of ..." with the list.
    assert len(lines) == 1 and field in lines[0] and ("expected" in lines[0] or "is not one of" in lines[0])
    assert "Traceback" not in err


def test_elevation_gives_mac_as_partial_pressure(capsys):
    # ICAO standard atmosphere (ISO 2533): 70.12 kPa at 3000 m; 1 MAC sevoflurane at 40 years is
    # then 1.80 x 101.325 / 70.12 = 2.601 % (MAC as a partial pressure, common practice, no source).
    # rel 1e-3 covers the 4-digit table pressure.
    code, out, _ = run(["mac", "--agent", "sevoflurane", "--age", "40", "--elevation", "3000 m", "--json"], capsys)
    doc = json.loads(out)
    assert code == 0 and doc["pressure_basis"] == "standard atmosphere"
    assert doc["ambient_pressure"]["magnitude"] == pytest.approx(70.12, rel=1e-3)
    assert doc["mac"]["magnitude"] == pytest.approx(1.80 * 101.325 / 70.12, rel=1e-3)


def test_missing_option_exits_2(capsys):
    code, _, err = run(["mac", "--age", "40"], capsys)
    assert code == 2 and "--agent" in err


def test_help_and_version(capsys):
    code, out, _ = run(["mac", "--help"], capsys)
    assert code == 0 and "--total-mac" in out and "--nitrous-oxide" in out
    code, out, _ = run(["--version"], capsys)
    # The version printed is the installed distribution's (packaging metadata).
    assert code == 0 and out.strip() == f"lowflow {__version__}" == f"lowflow {metadata.version('lowflow-estimator')}"


def test_python_dash_m_runs_the_verb():
    r = subprocess.run(
        [sys.executable, "-m", "estimator", "mac", "--agent", "halothane", "--age", "40", "--json"],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert r.returncode == 0, r.stderr
    # Mapleson 1996 Table 2: halothane 0.75 % at 40 years.
    assert json.loads(r.stdout)["mac"]["magnitude"] == pytest.approx(0.75, rel=1e-12)
