"""Small helpers shared by the input-contract and CLI-output tests."""

from __future__ import annotations

import pytest

from estimator.cli import main

#: A minimal valid scenario file.
SCENARIO = """
[patient]
weight = "70 kg"
[agent]
name = "sevoflurane"
[[phases]]
duration = "10 min"
oxygen = "1 L/min"
air = "1 L/min"
vaporizer = "2 %"
"""


def run(capsys, *args):
    """``lowflow ARGS``: (exit status, stdout, stderr)."""
    with pytest.raises(SystemExit) as exc:
        main(list(args))
    out = capsys.readouterr()
    return exc.value.code, out.out, out.err
