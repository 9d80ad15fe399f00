"""Output files of the ``lowflow`` verbs and errors about command-line values, named by option.

One rule serves every output flag (``--csv``, ``--report``...), and an error about a value given
on the command line is named by its option.

Examples
--------
>>> output_paths({"--csv": "log.csv"}, {"LOG": "log.csv"})
Traceback (most recent call last):
...
estimator.errors.InputError: --csv: got 'log.csv'; expected a file other than the input LOG (it would be overwritten)
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from ..errors import InputError

#: Folders of pseudo-files (kernel and device interfaces): never an output, whatever stat says.
_PSEUDO = tuple(Path(p) for p in ("/proc", "/sys", "/dev"))


def _same(a: Path, b: Path) -> bool:
    try:
        return a.resolve() == b.resolve() or (a.exists() and b.exists() and os.path.samefile(a, b))
    except OSError:
        return False


def output_paths(outputs: dict[str, Any], inputs: dict[str, Any]) -> dict[str, Path]:
    """Check every output flag before the run: one rule for all verbs.

    An output must be a new or regular file in an existing folder, not a pseudo-file (``/proc``,
    ``/sys``, ``/dev``), not an input of the same run and not another output's file. Errors name the
    flag and exit with status 2.

    Parameters
    ----------
    outputs : dict
        Flag (``"--csv"``) -> path given, or ``None`` when the flag is unused.
    inputs : dict
        Argument or flag naming an input (``"LOG"``, ``"--prices"``) -> its path, or ``None``.

    Returns
    -------
    dict
        Flag -> Path of the outputs given.
    """
    out: dict[str, Path] = {}
    for flag, value in outputs.items():
        if value is None:
            continue
        path = Path(value)
        folder = path.parent if str(path.parent) else Path(".")
        try:
            real = path.resolve()
        except (OSError, RuntimeError):
            raise InputError(flag, str(value), "a file path that can be resolved") from None
        if any(real == p or p in real.parents for p in _PSEUDO):
            raise InputError(flag, str(value), "a regular file to write, not a system or device file")
        if not folder.is_dir():
            raise InputError(flag, str(value), f"a file in an existing folder ({folder} is not a folder)")
        if path.exists() and not path.is_file():
            raise InputError(flag, str(value), "a regular file to write, not a folder or device")
        for name, source in inputs.items():
            if source is not None and _same(path, Path(source)):
                raise InputError(flag, str(value), f"a file other than the input {name} (it would be overwritten)")
        for other, seen in out.items():
            if _same(path, seen):
                raise InputError(flag, str(value), f"a file other than the one {other} writes")
        out[flag] = path
    return out


def write_output(flag: str, path: Path, writer: Callable[[Path], Any]) -> Any:
    """Run ``writer(path)``; a failed write is an error naming the flag (exit status 2)."""
    try:
        return writer(path)
    except OSError as exc:
        raise InputError(flag, str(path), f"a file that can be written ({exc.strerror or exc})") from None


@contextmanager
def option_names(mapping: Mapping[str, str | None]) -> Iterator[None]:
    """Rename an :class:`InputError` about a field set by an option to that option.

    Parameters
    ----------
    mapping : dict
        Model field (``"weeks"``) -> the option that set it (``"--weeks"``), or ``None`` when the
        option was not given (the value then came from the file, and the field keeps its name).

    Examples
    --------
    >>> with option_names({"weeks": "--weeks"}):
    ...     raise InputError("weeks", 0, "1 to 1040 weeks")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: --weeks: got 0; expected 1 to 1040 weeks
    """
    try:
        yield
    except InputError as exc:
        option = mapping.get(exc.field)
        if option is None:
            raise
        raise InputError(option, exc.value, exc.expected) from None


def terminal_progress(label: str) -> Callable[[int, int], None]:
    """A ``progress(done, total)`` callback drawing one line on stderr, only when stderr is a terminal.

    Piped or captured output (scripts, tests, ``--json > file``) stays clean.
    """
    import sys

    if not sys.stderr.isatty():
        return lambda done, total: None

    def show(done: int, total: int) -> None:
        end = "\n" if done >= total else ""
        sys.stderr.write(f"\r{label}: {done} of {total}{end}")
        sys.stderr.flush()

    return show


def json_text(result: Any, verb: str, files: Mapping[str, Path | str | None] | None = None) -> str:
    """The ``--json`` document of a verb: the result, the clinical caution and its provenance (the
    program, its version, the verb and each input file's name and SHA-256 digest, of the bytes the
    result was computed from when the verb runs inside :func:`estimator.errors.reads_recorded`)."""
    import json

    from ..caution import stamp
    from ..errors import bytes_read
    from ..jsonout import jsonable

    doc = jsonable(result)
    if not isinstance(doc, dict):
        doc = {"result": doc}
    inputs = {Path(p).name: bytes_read(p) for p in (files or {}).values() if p is not None}
    return json.dumps(stamp(doc, f"lowflow {verb}", inputs), indent=2, allow_nan=False)


#: Verbs that run the compiled model.
ENGINE_VERBS = frozenset({"case", "safe-flow", "supply", "forecast", "audit"})


def announce_first_compile(argv: list[str]) -> None:
    """Say so on a terminal when the compiled model is not cached yet (the first run compiles it,
    10-20 s, without another word otherwise); silent when piped, when cached, or for other verbs."""
    import os
    import sys

    verb = next((a for a in argv if not a.startswith("-")), None)
    if verb not in ENGINE_VERBS or not sys.stderr.isatty() or os.environ.get("NUMBA_CACHE_DIR"):
        return
    here = Path(__file__).resolve().parent.parent / "numerics" / "__pycache__"
    if not any(here.glob("dopri5.integrate_phase-*.nbi")):
        sys.stderr.write("lowflow: compiling the model once (10-20 s; later runs load it from the cache)...\n")
        sys.stderr.flush()


def calibration_json(scenario: Any, applied: float | None = None) -> dict[str, Any]:
    """``{"calibration": ...}`` for a JSON document when a department calibration is attached (else empty)."""
    cal = scenario.attached_calibration
    if cal is None:  # the calibration code loads only when a calibration is attached
        return {}
    from ..inputs.calibration_file import calibration_note

    used = scenario.uptake_factor if applied is None else applied
    return {"calibration": calibration_note(cal, scenario.agent.name, used)}


def calibration_lines(scenario: Any, applied: float | None = None) -> list[str]:
    """The text summary's lines on an attached calibration: the factor, its interval, its source, warnings."""
    doc = calibration_json(scenario, applied).get("calibration")
    if doc is None:
        return []
    from ..inputs.calibration_file import note_text

    return [note_text(doc)] + [f"  [{w['code']}] {w['message']}" for w in doc["warnings"]]
