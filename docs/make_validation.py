"""Write docs/VALIDATION.md from the reference checks of the test suite.

Usage (from the repository root)::

    uv run python docs/make_validation.py

Runs pytest twice on the test files that compare model values with outside values, with the
environment variable LOWFLOW_VALIDATION_OUT naming a scratch file; each ``record(...)`` call in those
tests (tests/validation.py) appends one row there. The tests marked ``validation`` (checks against a
published source: ``uv run pytest -m validation`` runs exactly these) fill the *validation* section:
conditions, published value with its spread, the model's value, the tolerance and how it was
derived, pass or fail. The other recorded tests (a formula re-evaluated, scipy or CoolProp on the same
equations, the model against its own runs) fill the separate *consistency* section. The exit status
is pytest's.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
OUT = ROOT / "docs" / "VALIDATION.md"
COMMAND = "uv run python docs/make_validation.py"
ENV = "LOWFLOW_VALIDATION_OUT"

#: Test files whose reference checks are recorded, in the order of the report.
TEST_FILES = (
    "tests/test_physiology.py",
    "tests/test_mac.py",
    "tests/test_closed_form.py",
    "tests/test_engine_world.py",
    "tests/test_site.py",
    "tests/test_engine_site.py",
    "tests/test_vaporizer.py",
    "tests/test_flowmeter.py",
    "tests/test_cylinders.py",
    "tests/test_carbon.py",
    "tests/test_safety.py",
    "tests/test_demo_cases.py",
    "tests/test_validation_published.py",
)


def run_tests(out: Path, files: tuple[str, ...] = TEST_FILES, marker: str = "validation") -> int:
    """Run pytest on ``files`` selecting ``-m marker`` with the recorder writing to ``out``."""
    env = {**os.environ, ENV: str(out)}
    existing = [f for f in files if (ROOT / f).is_file()]
    cmd = [sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "-m", marker, *existing]
    return subprocess.call(cmd, cwd=ROOT, env=env)


def read_rows(path: Path) -> list[dict]:
    """The recorded rows, in the order they were written."""
    if not path.is_file():
        return []
    return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines() if line.strip()]


def _cell(value) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        text = f"{value:.5g}"
    else:
        text = str(value)
    return text.replace("|", "\\|").replace("\n", " ")


def _outcome(row: dict) -> str:
    return "not scored" if row["passed"] is None else _cell(bool(row["passed"]))


def _counts(rows: list[dict]) -> str:
    failed = sum(r["passed"] is False for r in rows)
    unscored = sum(r["passed"] is None for r in rows)
    scored = len(rows) - unscored
    text = f"{scored - failed} pass, {failed} fail"
    return text + (f", {unscored} shown but not scored (no published spread)" if unscored else "")


def _table(header: list[str], rows: list[list[str]]) -> list[str]:
    lines = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    lines += ["| " + " | ".join(r) + " |" for r in rows]
    return lines


def fitted_parameters() -> list[str]:
    """Parameters of estimator/data fitted to published data (confidence "F"), as text lines."""
    import tomllib

    out = []
    for path in sorted((ROOT / "estimator" / "data").glob("*.toml")):
        data = tomllib.loads(path.read_text(encoding="utf-8"))
        sources = data.get("sources", {})

        stack = [(data, f"{path.name}: ")]
        while stack:
            table, where = stack.pop()
            for key, value in table.items():
                if isinstance(value, dict) and value.get("confidence") == "F":
                    src = sources.get(value.get("source", ""), value.get("source", ""))
                    out.append(f"- `{where}{key}` = {value.get('value')}: fitted to {src}. {value.get('note', '')}")
                elif isinstance(value, dict):
                    stack.append((value, f"{where}{key}."))
    return out


def render(rows: list[dict], when: str, command: str = COMMAND, consistency: list[dict] | None = None) -> str:
    """The Markdown report: ``rows`` (checks against published sources), then ``consistency``."""
    summary = f"{len(rows)} checks against published sources: {_counts(rows)}"
    if consistency is not None:
        summary += f"; {len(consistency)} consistency checks"
    lines = [
        "# Validation report",
        "",
        f"Generated {when} by `{command}` ({summary}). Do not edit by hand: run the command again.",
        "",
        "## Validation: the model against published values",
        "",
        "Each row is one check marked `validation` (`uv run pytest -m validation` runs exactly these): a "
        "model value against a value published outside the project (a measurement in patients or "
        "volunteers, a published table, a standard, a reference equation of state). The tolerance is "
        "derived from the published between-patient spread where there is one, and says how; a row "
        "whose source reports no spread is shown but not scored. Sources marked [S] were read in a "
        "secondary source, values marked from memory are so marked. The measurements of agent and gas "
        "use, with their conditions and derivations, are in tests/data/published/studies.toml.",
        "",
        f"Validation: {_counts(rows)}.",
        "",
    ]
    fitted = fitted_parameters()
    if fitted:
        lines += [
            "Parameters fitted to published data (not independent checks: rows from the same study check "
            "the fit, not the model):",
            "",
            *fitted,
            "",
        ]
    body = [
        [
            str(i),
            _cell(r["quantity"]),
            _cell(r.get("conditions") or ""),
            _cell(r["published"]),
            _cell(r["computed"]),
            _cell(r.get("unit") or ""),
            _cell(r["tolerance"]),
            _outcome(r),
            _cell(r["source"]),
            f"`{_cell(r.get('test', ''))}`" if r.get("test") else "",
        ]
        for i, r in enumerate(rows, start=1)
    ]
    header = ["#", "quantity", "conditions", "published value", "value computed", "unit", "tolerance", "pass"]
    lines += _table([*header, "source", "test"], body)
    if consistency is not None:
        lines += [
            "",
            "## Consistency: the code against itself",
            "",
            "Checks that compare the code with itself, not with the world: a formula re-evaluated by "
            "hand, scipy or CoolProp on the same equations the code uses, a table copied from its source, the "
            "model against its own sea-level or reference run. They guard against slips, not against a "
            "wrong model.",
            "",
            f"Consistency: {_counts(consistency)}.",
            "",
        ]
        body = [
            [
                str(i),
                _cell(r["quantity"]),
                _cell(r["computed"]),
                _cell(r["published"]),
                _cell(r.get("unit") or ""),
                _cell(r["source"]),
                _cell(r["tolerance"]),
                _outcome(r),
                f"`{_cell(r.get('test', ''))}`" if r.get("test") else "",
            ]
            for i, r in enumerate(consistency, start=1)
        ]
        header = ["#", "quantity", "value computed", "reference value", "unit", "reference", "tolerance", "pass"]
        lines += _table([*header, "test"], body)
    return "\n".join(lines) + "\n"


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        val, cons = Path(tmp) / "validation.jsonl", Path(tmp) / "consistency.jsonl"
        status = run_tests(val, marker="validation")
        run_tests(cons, marker="not validation")
        rows, consistency = read_rows(val), read_rows(cons)
    OUT.write_text(render(rows, dt.date.today().isoformat(), consistency=consistency), encoding="utf-8")
    print(f"wrote {OUT.relative_to(ROOT)}: {len(rows)} validation and {len(consistency)} consistency checks")
    return status


if __name__ == "__main__":
    sys.exit(main())
