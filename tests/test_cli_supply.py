"""``lowflow supply``: text and JSON output, error exit, and one real case through the engine."""

import json
from pathlib import Path

import pytest

from estimator.cli import CAUTION, main

DATA = Path(__file__).parent / "data"


def run(capsys, *args):
    with pytest.raises(SystemExit) as ex:
        main(list(args))
    out = capsys.readouterr()
    return ex.value.code, out.out, out.err


def test_backup_cylinders_text_and_json(capsys):
    code, out, _ = run(capsys, "supply", str(DATA / "inventory_backup.toml"))
    assert code == 0 and out.rstrip().endswith(CAUTION) and "Bottleneck: backup manifold" in out
    code, out, _ = run(capsys, "supply", str(DATA / "inventory_backup.toml"), "--json")
    j = json.loads(out)
    assert j["bottleneck"] == "backup manifold" and j["reorder_by"] == "2026-03-01"
    # 4 x 47 L at 200 bar (Z 0.931) less a 15 bar reserve, about 37 000 L; the drive gas at twice
    # 24 L/min plus 4 L/min is 52 L/min: about 0.5 day (Klemenzson and Perouansky 2004 multiplier).
    assert j["days_of_supply"]["magnitude"] == pytest.approx(37040 / (52 * 1440), rel=2e-3)
    assert j["days_of_supply"]["units"] == "day"
    assert "SUPPLY_UNDER_ONE_DAY" in {w["code"] for w in j["warnings"]}
    assert j["gas_volume_reference"].startswith("free gas at 15 degC")


def test_unknown_key_exits_2_with_one_line(capsys, tmp_path):
    f = tmp_path / "inv.toml"
    f.write_text('[[cylinders]]\nname = "A"\ngas = "oxygen"\nwater_capcity = "10 L"\n')
    code, _, err = run(capsys, "supply", str(f))
    assert code == 2 and err.count("\n") == 1 and "cylinders[0].water_capcity" in err


def test_remote_site_through_the_engine(capsys):
    # One real scenario through the engine (tests/data/supply_case.toml).
    code, out, _ = run(capsys, "supply", str(DATA / "inventory_remote.toml"), "--json")
    assert code == 0
    j = json.loads(out)
    names = {i["name"]: i for i in j["items"]}
    assert j["bottleneck_supply"] == "oxygen"
    assert names["N2O spare"]["runtime"] is None and names["N2O spare"]["status"] == "not used"
    assert names["Concentrator 1"]["status"] == "renewable"
    assert j["cases_possible"] > 0 and len(j["depletion"]["day"]) > 10
    assert set(j["depletion"]["remaining"]) == {
        n for n, i in names.items() if i["kind"] not in ("concentrator", "pipeline")
    }
