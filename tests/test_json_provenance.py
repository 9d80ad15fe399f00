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
        assert doc["generator"]["name"] == "lowflow-estimator" and doc["generator"]["version"], verb
        prov = doc["provenance"]
        assert prov["made_by"] == f"lowflow {verb}" and prov["version"], verb
        files = [Path(a) for a in argv[1:] if a.endswith((".toml", ".csv"))]
        assert [i["name"] for i in prov["inputs"]] == [f.name for f in files], verb
        assert [i["sha256"] for i in prov["inputs"]] == [hashlib.sha256(f.read_bytes()).hexdigest() for f in files]


def test_provenance_digests_the_bytes_the_result_was_computed_from(tmp_path, capsys, monkeypatch):
    # A file changed between the verb's read and the JSON output must not be digested a second time:
    # the digest names the input the numbers came from.
    import hashlib
    import json
    from pathlib import Path

    import estimator.cli.outputs as outputs
    from estimator.cli import main

    demo = Path(__file__).resolve().parent.parent / "demo_cases" / "kestrel_lap_chole.toml"
    case = tmp_path / "case.toml"
    original = demo.read_bytes()
    case.write_bytes(original)
    real = outputs.json_text

    def edit_then_write(*args, **kwargs):
        case.write_bytes(original + b"\n# edited after the run\n")
        return real(*args, **kwargs)

    monkeypatch.setattr("estimator.cli.case.json_text", edit_then_write)
    try:
        main(["case", str(case), "--json"])
    except SystemExit as exc:
        assert exc.code in (0, None)
    doc = json.loads(capsys.readouterr().out)
    assert doc["provenance"]["inputs"][0]["sha256"] == hashlib.sha256(original).hexdigest()


def test_every_json_document_names_its_generator():
    # The generator key: program name and version, as the package metadata gives them.
    from estimator import __version__
    from estimator.caution import stamp

    doc = stamp({"x": 1}, "lowflow case")
    assert doc["generator"] == {"name": "lowflow-estimator", "version": __version__}
