"""Every JSON document the tool writes carries the clinical caution and its provenance."""

from __future__ import annotations


def test_every_json_output_carries_the_caution_and_its_provenance(tmp_path):
    # Clinical safety: a JSON document read without the screen still says what it is and is not,
    # and names the program, its version and the digest of the input it was computed from.
    import hashlib
    import json
    from pathlib import Path

    from typer.testing import CliRunner

    from estimator.caution import CAUTION
    from estimator.cli import app

    demo = Path(__file__).resolve().parent.parent / "demo_cases"
    runs = {
        "case": ["case", str(demo / "kestrel_lap_chole.toml")],
        "safe-flow": ["safe-flow", str(demo / "kestrel_lap_chole.toml"), "--no-grid"],
        "supply": ["supply", str(demo / "highland_clinic_inventory.toml")],
        "forecast": ["forecast", str(demo / "kestrel_case_mix.toml"), "--weeks", "1"],
        "audit": ["audit", str(demo / "kestrel_audit_log.csv")],
        "mac": ["mac", "--agent", "sevoflurane", "--age", "40"],
        "flowmeter": ["flowmeter", "--reading", "2 L/min", "--calibrated-for", "oxygen"],
        "compare": ["compare", str(demo / "kestrel_lap_chole.toml"), str(demo / "kestrel_nitrous_dental.toml")],
    }
    for verb, argv in runs.items():
        out = CliRunner().invoke(app, [*argv, "--json"])
        assert out.exit_code == 0, (verb, out.output[-500:])
        doc = json.loads(out.stdout)
        assert doc["caution"] == CAUTION, verb
        prov = doc["provenance"]
        assert prov["made_by"] == f"lowflow {verb}" and prov["version"], verb
        files = [Path(a) for a in argv[1:] if a.endswith((".toml", ".csv"))]
        assert [i["name"] for i in prov["inputs"]] == [f.name for f in files], verb
        assert [i["sha256"] for i in prov["inputs"]] == [hashlib.sha256(f.read_bytes()).hexdigest() for f in files]
