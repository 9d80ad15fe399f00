"""Shared machinery of every TOML input contract: reader, file references and error conversion.

One reader, one way to name a file inside a file, and one converter from pydantic's errors to
:class:`~estimator.errors.InputError`.

Text is never a path. A loader takes a path (``str`` or ``os.PathLike``) and reads that file; a
``*_from_text`` function parses text. Which one runs is decided by the function called, never by
what the string looks like. Error messages name the file or the field, never the file's contents.

Examples
--------
>>> toml_from_text('a = 1', "scenario")
{'a': 1}
>>> toml_from_text('a = ' + '[' * 5000, "scenario")
Traceback (most recent call last):
...
estimator.errors.InputError: scenario: got '(TOML text)'; expected TOML whose arrays and tables are not nested hundreds deep
"""

from __future__ import annotations

import os
import re
import tomllib
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from .errors import InputError, read_text_file


def toml_from_text(text: str, name: str) -> dict[str, Any]:
    """Parse TOML text, or raise an :class:`~estimator.errors.InputError` naming ``name`` (never quoting the text).

    Parameters
    ----------
    text : str
        The TOML document.
    name : str
        What the text is, as the error should name it (``"scenario"``, a file path).

    Returns
    -------
    dict
    """
    if not isinstance(text, str):
        raise InputError(name, type(text).__name__, "TOML text (a str)")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(name, "(TOML text)", f"valid TOML ({_toml_reason(exc)})") from None
    except RecursionError:
        raise InputError(name, "(TOML text)", "TOML whose arrays and tables are not nested hundreds deep") from None


def _toml_reason(exc: tomllib.TOMLDecodeError) -> str:
    """tomllib's reason and place, with any key it quotes from the file left out.

    >>> _toml_reason(tomllib.TOMLDecodeError("Cannot declare ('a', 'secret') twice (at line 2, column 10)"))
    'Cannot declare a table twice (at line 2, column 10)'
    """
    text = str(exc).splitlines()[0][:200]
    return re.sub(r"\((?:'[^']*'|\"[^\"]*\")(?:,\s*(?:'[^']*'|\"[^\"]*\"))*,?\)", "a table", text)


def read_toml(path: str | os.PathLike[str], name: str, expected: str) -> dict[str, Any]:
    """Read and parse a TOML file; every failure is an :class:`~estimator.errors.InputError` naming ``name``.

    Parameters
    ----------
    path : str or os.PathLike
        The file. A ``str`` is always a path, never TOML text (see :func:`toml_from_text`).
    name : str
        What the file is (``"scenario"``, ``"--policy"``).
    expected : str
        What would have been accepted, e.g. ``"an existing scenario TOML file"``.

    Examples
    --------
    >>> read_toml("no/such/file.toml", "scenario", "an existing scenario TOML file")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: scenario: got 'no/such/file.toml'; expected an existing scenario TOML file
    """
    path = as_path(path, name, expected)
    return toml_from_text(read_text_file(path, name, expected), f"{name} {path.name}")


def as_path(value: Any, name: str, expected: str) -> Path:
    """``value`` as a :class:`~pathlib.Path`, or an :class:`~estimator.errors.InputError` for anything else."""
    if isinstance(value, bytes):
        value = os.fsdecode(value)
    if not isinstance(value, str | os.PathLike):
        raise InputError(name, type(value).__name__, f"a file path ({expected})")
    text = os.fspath(value)
    if "\n" in text or "\x00" in text or not text.strip():
        hint = f"; to parse text, call {name}_from_text" if name.isidentifier() else ""
        raise InputError(name, text, f"a file path, not text ({expected}{hint})")
    return Path(text)


def named_file(value: Any, base_dir: str | os.PathLike[str], field: str, suffixes: tuple[str, ...]) -> Path:
    """A file named inside another file: resolved against that file's folder, a regular file with
    one of ``suffixes``; its contents are never read here.

    Examples
    --------
    >>> named_file("/etc/passwd", ".", "demand.cases[0].scenario", (".toml",))
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: demand.cases[0].scenario: got '/etc/passwd'; expected a .toml file ...
    """
    kinds = " or ".join(suffixes)
    expected = f"a {kinds} file (a path relative to the file that names it)"
    if not isinstance(value, str) or not value.strip() or "\x00" in value:
        raise InputError(field, value, expected)
    path = Path(value)
    path = path if path.is_absolute() else Path(base_dir) / path
    if path.suffix.lower() not in suffixes:
        raise InputError(field, value, expected)
    try:
        regular = path.is_file()
    except OSError:
        regular = False
    if not regular:
        raise InputError(field, value, f"an existing {kinds} file (relative to the file that names it)")
    return path


def check_scenario_suffix(path: Path, name: str) -> None:
    """Scenario files end in ``.toml``, the same rule for every verb that reads one."""
    if path.suffix.lower() != ".toml":
        raise InputError(name, str(path), "a scenario file ending in .toml")


# ----------------------------------------------------------------------------- pydantic errors

#: pydantic error types -> what we accept, in our words.
_EXPECTED = {
    "list_type": "a list (an array [..] or repeated [[tables]])",
    "tuple_type": "a list (an array [..])",
    "dict_type": "a table of keys and values",
    "model_type": "a table of keys and values",
    "model_attributes_type": "a table of keys and values",
    "int_type": "a whole number",
    "int_parsing": "a whole number",
    "int_from_float": "a whole number",
    "float_type": "a number",
    "float_parsing": "a number",
    "finite_number": "a finite number",
    "bool_type": "true or false",
    "bool_parsing": "true or false",
    "string_type": "text in quotes",
    "date_type": "a date such as 2026-03-02",
    "date_parsing": "a date such as 2026-03-02",
    "date_from_datetime_parsing": "a date such as 2026-03-02",
    "missing": "a value: this key is required",
}


def _loc(loc: tuple[Any, ...]) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        elif not str(part).startswith(("function-", "lax-", "union[", "tagged-union[")) and part not in (
            "str",
            "int",
            "float",
            "bool",
            "list[...]",
        ):
            out += ("." if out else "") + str(part)
    return out


def _join(a: str, b: str) -> str:
    return (a + b if b.startswith("[") else f"{a}.{b}") if a and b else (a or b)


def _dig(value: Any, path: str) -> Any:
    """The item at a dotted path such as ``phases[1].vaporizer`` inside parsed input."""

    for key, index in re.findall(r"([^.\[\]]+)|\[(\d+)\]", path):
        if key and isinstance(value, dict):
            value = value.get(key, "(missing)")
        elif index and isinstance(value, list) and int(index) < len(value):
            value = value[int(index)]
        elif not isinstance(value, dict | list):
            return value
        else:
            return "(missing)"
    return value


def known_keys(model: type[BaseModel] | None, loc: tuple[Any, ...]) -> list[str]:
    """The keys valid at ``loc`` (a pydantic location) inside ``model``; empty if unknown."""
    current: Any = model
    for part in loc:
        if isinstance(part, int) or current is None:
            continue
        field = getattr(current, "model_fields", {}).get(part)
        if field is None:
            return []
        current = _model_in(field.annotation)
    if current is None:
        return []
    return sorted(k for k, f in current.model_fields.items() if not (f.exclude or k == "base_dir"))


def _model_in(annotation: Any, depth: int = 0) -> type[BaseModel] | None:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    if depth > 4:
        return None
    for arg in getattr(annotation, "__args__", ()):
        found = _model_in(arg, depth + 1)
        if found is not None:
            return found
    return None


def input_error_from_validation(
    exc: ValidationError, prefix: str = "", model: type[BaseModel] | None = None
) -> InputError:
    """The first error of a pydantic ValidationError as an :class:`~estimator.errors.InputError`, in our words.

    The one converter of every contract. A value error raised as ``"key: expected text"`` by a
    model validator names its own key below the model's place.

    Parameters
    ----------
    exc : pydantic.ValidationError
    prefix : str
        Where the validated table sits in its document, e.g. ``"prices"`` or ``"case_types[2]"``.
    model : pydantic model class, optional
        The model validated; an unknown key's message then lists the keys valid there.

    Examples
    --------
    >>> from pydantic import BaseModel, ConfigDict
    >>> class T(BaseModel):
    ...     model_config = ConfigDict(extra="forbid")
    ...     items: list[int] = []
    >>> try:
    ...     T.model_validate({"items": "x"})
    ... except ValidationError as e:
    ...     print(input_error_from_validation(e, "table"))
    table.items: got 'x'; expected a list (an array [..] or repeated [[tables]])
    """
    err = exc.errors(include_url=False)[0]
    loc = tuple(err.get("loc", ()))
    field = _loc(loc)
    kind = err.get("type", "")
    msg = str(err.get("msg", "")).removeprefix("Value error, ")
    value = err.get("input")
    if kind == "extra_forbidden":
        keys = known_keys(model, loc[:-1]) if model is not None else []
        where = f": {', '.join(keys)}" if keys else " (see the README)"
        # the value of an unknown key is never shown: the key is the mistake, and a file that is not
        # the expected kind (a file named inside another) must not have its contents echoed
        return InputError(
            _join(prefix, field) or "input", "(unknown key)", f"a key valid here{where}; check the spelling"
        )
    if kind == "missing":
        return InputError(_join(prefix, field) or "input", "(missing)", _EXPECTED["missing"])
    if kind == "value_error" and ": " in msg and " " not in msg.split(": ", 1)[0]:
        sub, msg = msg.split(": ", 1)
        field = _join(field, sub)
        value = _dig(value, sub)
    elif kind in _EXPECTED:
        msg = _EXPECTED[kind]
    elif kind == "literal_error":
        msg = "one of " + str(err.get("ctx", {}).get("expected", "")).replace("'", "")
    elif msg.lower().startswith("input should be "):
        msg = msg[len("input should be ") :]
    if isinstance(value, dict | list):
        value = "(table)" if isinstance(value, dict) else "(list)"
    return InputError(_join(prefix, field) or "input", value, msg)
