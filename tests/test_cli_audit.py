"""``lowflow audit`` through estimator.cli.main: JSON keys, human output, exit status 2 on bad input."""

import json
from pathlib import Path

import pytest

from estimator.cli import CAUTION, main

DATA = Path(__file__).parent / "data"
KEYS = {
    "rows",
    "rejections",
    "cases",
    "totals",
    "kpis",
    "counterfactual",
    "co2e_basis",
    "gas_volume_reference",
    "warnings",
}


def run(args, capsys):
    with pytest.raises(SystemExit) as exc:
        main(args)
    out = capsys.readouterr()
    return exc.value.code, out.out, out.err


def test_json_keys(capsys):
    code, out, _ = run(
        ["audit", str(DATA / "audit_two_rooms.csv"), "--json", "--basis", "ar5_gwp100", "--demo-prices"], capsys
    )
    assert code == 0
    doc = json.loads(out)
    assert KEYS <= set(doc)
    assert doc["co2e_basis"] == "ar5_gwp100"
    assert doc["rows"] == {"read": 9, "used": 9, "rejected": 0}
    case = doc["cases"][0]
    assert {"case_id", "agent_liquid", "co2e", "cost"} <= set(case)
    assert case["agent_liquid"]["units"] == "milliliter"
    assert case["co2e"]["basis"] == "ar5_gwp100"
    assert case["cost"]["currency"] == "demo units"
    assert doc["gas_volume_reference"].startswith("free gas at 15 degC")
    assert doc["counterfactual"] is None


def test_human_output_reports_rejections_and_ends_with_caution(capsys):
    code, out, _ = run(["audit", str(DATA / "audit_malformed.csv")], capsys)
    assert code == 0
    assert "rows read 11, used 2, rejected 9" in out
    assert "line 3: time: got 'yesterday'" in out
    assert out.strip().endswith(CAUTION)


def test_missing_column_is_one_line_exit_2(tmp_path, capsys):
    path = tmp_path / "log.csv"
    path.write_text("case_id,time,oxygen_flow,air_flow,agent,vaporizer_setting\nA,0,1,1,sevoflurane,2\n")
    code, _, err = run(["audit", str(path)], capsys)
    assert code == 2
    assert err.count("\n") == 1 and "nitrous_oxide_flow" in err


@pytest.mark.parametrize("extra", [["--basis", "ar9"], ["--quadrature", "simpson"], ["--manifold-loss", "1.5"]])
def test_bad_options_exit_2(extra, capsys):
    code, _, err = run(["audit", str(DATA / "audit_two_rooms.csv"), *extra], capsys)
    assert code == 2 and err.startswith("lowflow: error:")


def test_exports_written(tmp_path, capsys):
    args = [
        "audit",
        str(DATA / "audit_two_rooms.csv"),
        "--demo-prices",
        "--report",
        str(tmp_path / "r.html"),
        "--xlsx",
        str(tmp_path / "r.xlsx"),
        "--csv",
        str(tmp_path / "r.csv"),
    ]
    code, out, _ = run(args, capsys)
    assert code == 0
    for name in ("r.html", "r.xlsx", "r.csv"):
        assert (tmp_path / name).stat().st_size > 0 and f"wrote {tmp_path / name}" in out


def test_policy_counterfactual_through_the_engine(tmp_path, capsys):
    policy = tmp_path / "policy.toml"
    policy.write_text('[policy]\nname = "half a litre"\nfresh_gas_flow = "0.5 L/min"\nblock = "30 min"\n')
    code, out, _ = run(["audit", str(DATA / "audit_two_rooms.csv"), "--policy", str(policy), "--json"], capsys)
    assert code == 0
    cf = json.loads(out)["counterfactual"]
    assert cf["policy"]["name"] == "half a litre"
    assert cf["totals"]["cases"] + len(cf["skipped"]) == 2
    assert cf["totals"]["savings"]["co2e"]["basis"] == "ar6_gwp100"
