r"""Files named inside a case mix, and the CSV form of case-type rows.

A case mix may name other files: ``case_types_file`` (a CSV of further case types) and a case
type's ``scenario`` (a scenario TOML). Such a name is resolved relative to the folder of the
case-mix file (``base_dir``); case-mix *text* given without a folder may name no file at all. The
file must be a regular file with the expected suffix (``.csv``, ``.toml``); a device, a folder, a
FIFO or a file of another kind is refused by its name before anything is read, and what a
referenced file holds never appears in an error unless the file has first been recognised as the
expected kind (a CSV whose header names case-type keys). With ``confine=True`` (for uploads) a
name must stay inside ``base_dir``: no absolute paths and no ``..`` out of it.

Examples
--------
>>> rows = case_type_rows("name,per_week,weight_mean [kg]\nhip,5,82\n", ("name", "per_week", "weight_mean"))
>>> rows
[{'name': 'hip', 'per_week': 5.0, 'weight_mean': '82 kg'}]
>>> referenced_file("/etc/passwd", "case_types_file", Path("."), ".csv", "case-types CSV")
Traceback (most recent call last):
...
estimator.errors.InputError: case_types_file: got '/etc/passwd'; expected a case-types CSV file ending in .csv
"""

from __future__ import annotations

import csv
import difflib
import io
import re
import stat
from pathlib import Path
from typing import Any

from ..errors import InputError, read_text_file

_HEADER = re.compile(r"^\s*([A-Za-z0-9_]+)\s*(?:\[([^\]\n]*)\])?\s*$")


def referenced_file(
    name: str, where: str, base_dir: Path | None, suffix: str, kind: str, *, confine: bool = False
) -> Path:
    """The path of a file named inside a case mix, checked before it is read.

    Parameters
    ----------
    name : str
        The name as written in the case mix.
    where : str
        The field that names it, for errors (``case_types[1].scenario``).
    base_dir : pathlib.Path or None
        The case-mix file's folder; None for text given without one (then no file may be named).
    suffix, kind : str
        The expected suffix (``".csv"``) and a word for the file (``"scenario TOML"``).
    confine : bool
        Refuse names that leave ``base_dir`` (absolute, or ``..`` out of it).

    Raises
    ------
    InputError
        Naming ``where`` and the name as written, never the file's contents.
    """
    text = str(name)
    if not text.strip() or "\x00" in text:
        raise InputError(where, text, f"the name of a {kind} file")
    if not text.lower().endswith(suffix):
        raise InputError(where, text, f"a {kind} file ending in {suffix}")
    if base_dir is None:
        raise InputError(
            where,
            text,
            "no file name in case-mix text given without its folder (load the case mix from its file, "
            "or pass base_dir)",
        )
    path = Path(text)
    path = path if path.is_absolute() else Path(base_dir) / path
    if confine:
        inside = Path(base_dir).resolve()
        try:
            path.resolve().relative_to(inside)
        except ValueError:
            raise InputError(where, text, f"a {kind} file inside the case mix's folder") from None
    try:
        mode = path.stat().st_mode
    except (OSError, ValueError):
        mode = 0
    if not stat.S_ISREG(mode):
        raise InputError(where, text, f"an existing {kind} file ({suffix}), relative to the case-mix file's folder")
    return path


def case_type_rows(text: str, keys: tuple[str, ...], field: str = "case_types_file", start: int = 0) -> list[dict]:
    """Case-type rows (dicts of raw values) from CSV text.

    One column per key, an optional unit in brackets in the header (``duration_median [min]``),
    empty cells not given, ``per_weekday`` as numbers split by ``;``. The header must name only
    ``keys``; until it does, no text of the file is shown in an error.
    """
    reader = csv.reader(io.StringIO(text.lstrip("\ufeff")))
    try:
        header = next(reader)
    except StopIteration:
        raise InputError(field, "(empty file)", "a CSV file with a header row of case-type keys") from None
    except csv.Error:
        raise InputError(field, "(header row)", "a CSV header row of case-type keys") from None
    cols = []
    for i, h in enumerate(header, start=1):
        m = _HEADER.match(h)
        key = m.group(1) if m else ""
        if m is None or key not in keys:
            close = difflib.get_close_matches(key.lower(), keys, n=1) if m else []
            hint = f" (did you mean {close[0]}?)" if close else ""
            raise InputError(
                field,
                f"header column {i}",
                f"a case-type key such as 'duration_median [min]'{hint}; keys: " + ", ".join(keys),
            )
        cols.append((key, (m.group(2) or "").strip()))
    out: list[dict[str, Any]] = []
    try:
        for cells in reader:
            if not any(x.strip() for x in cells):
                continue
            where = f"case_types[{start + len(out)}]"
            if len(cells) != len(cols):
                line = reader.line_num
                raise InputError(where, f"{len(cells)} cells", f"{len(cols)} cells as in the header (line {line})")
            row: dict[str, Any] = {}
            for (key, unit), cell in zip(cols, cells, strict=True):
                cell = cell.strip()
                if not cell:
                    continue
                if key == "per_weekday":
                    row[key] = [_number(x, f"{where}.{key}") for x in cell.split(";")]
                elif key == "per_week":
                    row[key] = _number(cell, f"{where}.{key}")
                else:
                    row[key] = f"{cell} {unit}" if unit else cell
            out.append(row)
    except csv.Error as exc:
        raise InputError(field, f"line {reader.line_num}", f"well-formed CSV ({exc})") from None
    return out


def reference_text(path: Path, where: str, kind: str) -> str:
    """The UTF-8 text of a referenced file (an InputError naming ``where`` and the path otherwise)."""
    return read_text_file(path, where, f"an existing {kind} file")


def _number(text: str, where: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise InputError(where, text, "a number") from None
