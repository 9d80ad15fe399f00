"""Do the checks against published sources notice a wrong solubility? (issue 15, section 3)

Usage (from the repository root)::

    uv run python docs/run_mutants.py

Runs ``pytest -m validation`` once on the shipped ``estimator/data/agents.toml`` and once per mutant
(sevoflurane blood/gas doubled, desflurane blood/gas raised by 30 %, sevoflurane fat/blood halved),
with the validation recorder (tests/validation.py) writing every compared row to a scratch file. A
mutant is caught when pytest fails with it, and it is caught *by a row* when a row that passes on the
shipped data fails with the mutant (so a mutant is not counted as caught only because some rows
already fail on the shipped data). The data file is copied first and always restored, also when the
run is interrupted. Rows of the fit set (the studies the intertissue clearance was fitted to, marked
in their tolerance) are listed but do not count: a mutant must be caught by a held-out row. Prints one
line per mutant and the rows that changed; exit status 1 if a mutant is not caught by a held-out row.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
AGENTS = ROOT / "estimator" / "data" / "agents.toml"
ENV = "LOWFLOW_VALIDATION_OUT"
#: Text the published-study test adds to the tolerance of a fit-set row.
FIT_MARK = "[fit set"

#: (name, agent, key, factor) of each mutant.
MUTANTS = (
    ("sevoflurane blood/gas x 2", "sevoflurane", "blood_gas", 2.0),
    ("desflurane blood/gas x 1.3", "desflurane", "blood_gas", 1.3),
    ("sevoflurane fat/blood x 0.5", "sevoflurane", "fat_blood", 0.5),
)


def mutate(text: str, agent: str, key: str, factor: float) -> str:
    r"""``text`` of agents.toml with ``key`` of ``[agents.<agent>]`` multiplied by ``factor``.

    Only the ``value`` of that one line in that one agent's table changes.

    >>> text = "[agents.a]\nblood_gas = { value = 0.65, source = \"x\" }\n[agents.b]\nblood_gas = { value = 0.42 }\n"
    >>> print(mutate(text, "a", "blood_gas", 2.0))
    [agents.a]
    blood_gas = { value = 1.3, source = "x" }
    [agents.b]
    blood_gas = { value = 0.42 }
    <BLANKLINE>
    """
    start = text.index(f"[agents.{agent}]")
    end = text.find("\n[", start + 1)
    end = len(text) if end < 0 else end
    section = text[start:end]
    pattern = re.compile(rf"^({key} = \{{ value = )([0-9.]+)", re.MULTILINE)
    match = pattern.search(section)
    if match is None:
        raise KeyError(f"{key} not found for {agent}")
    new = f"{float(match.group(2)) * factor:.6g}"
    section = section[: match.start(2)] + new + section[match.end(2) :]
    return text[:start] + section + text[end:]


def run_validation(out: Path) -> tuple[int, dict[str, bool | None], set[str]]:
    """Run ``pytest -m validation``; return its status, each recorded row's outcome and the fit-set rows."""
    env = {**os.environ, ENV: str(out)}
    cmd = [sys.executable, "-m", "pytest", "-m", "validation", "-q", "-p", "no:cacheprovider"]
    status = subprocess.call(cmd, cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    rows: dict[str, bool | None] = {}
    fit: set[str] = set()
    if out.is_file():
        for line in out.read_text(encoding="utf-8").splitlines():
            r = json.loads(line)
            key = f"{r['test']} | {r['quantity']}"
            rows[key] = r["passed"]
            if FIT_MARK in r["tolerance"]:
                fit.add(key)
    return status, rows, fit


def main() -> int:
    backup = Path(tempfile.mkdtemp()) / "agents.toml"
    shutil.copy2(AGENTS, backup)
    original = backup.read_text(encoding="utf-8")
    missed = 0
    try:
        with tempfile.TemporaryDirectory() as tmp:
            status0, base, _ = run_validation(Path(tmp) / "base.jsonl")
            print(
                f"shipped data: pytest status {status0}, {sum(v is True for v in base.values())} of "
                f"{sum(v is not None for v in base.values())} scored rows pass"
            )
            for i, (name, agent, key, factor) in enumerate(MUTANTS):
                AGENTS.write_text(mutate(original, agent, key, factor), encoding="utf-8")
                status, rows, fit = run_validation(Path(tmp) / f"m{i}.jsonl")
                flipped = sorted(k for k, v in rows.items() if v is False and base.get(k) is True)
                held_out = [k for k in flipped if k not in fit]
                caught = bool(held_out)
                missed += not caught
                verdict = "CAUGHT" if caught else "NOT CAUGHT"
                print(
                    f"{name}: pytest status {status}; {verdict} by {len(held_out)} held-out row(s) that pass on the "
                    f"shipped data ({len(flipped) - len(held_out)} fit-set row(s) also changed)"
                )
                for k in flipped:
                    print(f"    {k}{' (fit set)' if k in fit else ''}")
                AGENTS.write_text(original, encoding="utf-8")
    finally:
        shutil.copy2(backup, AGENTS)
    return 1 if missed else 0


if __name__ == "__main__":
    sys.exit(main())
