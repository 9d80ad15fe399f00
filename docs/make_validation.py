"""Write docs/VALIDATION.md from the reference checks of the test suite.

Usage (from the repository root)::

    uv run python docs/make_validation.py

Runs pytest on the test files that compare model values with published ones, with the environment
variable LOWFLOW_VALIDATION_OUT naming a scratch file; each ``record(...)`` call in those tests
(tests/validation.py) appends one row there. The rows become one Markdown table: quantity, value
computed, published value, source, tolerance, pass, and the test that made the check. The exit
status is pytest's, or 1 if any recorded check failed.
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
)


def run_tests(out: Path, files: tuple[str, ...] = TEST_FILES) -> int:
    """Run pytest on ``files`` with the recorder writing to ``out``; return pytest's exit status."""
    env = {**os.environ, ENV: str(out)}
    existing = [f for f in files if (ROOT / f).is_file()]
    cmd = [sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", *existing]
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


def render(rows: list[dict], when: str, command: str = COMMAND) -> str:
    """The Markdown report of ``rows``."""
    failed = sum(not r["passed"] for r in rows)
    lines = [
        "# Validation report",
        "",
        "Each row is one check in the test suite of a model value against a value from outside the "
        "project: a published table or worked example, a standard, a reference library (CoolProp, "
        "scipy) or a fact of the trade. The tolerance is the one the test asserts, justified in a "
        "comment beside the test. Values from memory are marked so in the source column.",
        "",
        f"Generated {when} by `{command}` ({len(rows)} checks, {len(rows) - failed} pass, "
        f"{failed} fail). Do not edit by hand: run the command again.",
        "",
        "| # | quantity | value computed | published value | unit | source | tolerance | pass | test |",
        "|---|---|---|---|---|---|---|---|---|",
    ]
    for i, r in enumerate(rows, start=1):
        test = r.get("test", "")
        lines.append(
            "| "
            + " | ".join(
                [
                    str(i),
                    _cell(r["quantity"]),
                    _cell(r["computed"]),
                    _cell(r["published"]),
                    _cell(r.get("unit") or ""),
                    _cell(r["source"]),
                    _cell(r["tolerance"]),
                    _cell(bool(r["passed"])),
                    f"`{_cell(test)}`" if test else "",
                ]
            )
            + " |"
        )
    return "\n".join(lines) + "\n"


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "rows.jsonl"
        status = run_tests(out)
        rows = read_rows(out)
    OUT.write_text(render(rows, dt.date.today().isoformat()), encoding="utf-8")
    print(f"wrote {OUT.relative_to(ROOT)}: {len(rows)} checks")
    if status == 0 and any(not r["passed"] for r in rows):
        status = 1
    return status


if __name__ == "__main__":
    sys.exit(main())
