"""The one error type users see.

Every rejected input raises :class:`InputError`, which names the field, the value given and what
would have been valid. The CLI prints ``str(error)`` as a single line and exits with status 2.
"""

from __future__ import annotations

import os
from pathlib import Path


class InputError(ValueError):
    """Bad input: names the field, the value and the valid range or dimension.

    Parameters
    ----------
    field : str
        Dotted path of the offending field, e.g. ``"phases[2].oxygen"``.
    value : object
        The value as given by the user.
    expected : str
        What would have been accepted, e.g. ``"a flow such as '2 L/min'"`` or ``"0 to 15 L/min"``.

    Examples
    --------
    >>> str(InputError("patient.weight", "-3 kg", "0.5 to 300 kg"))
    "patient.weight: got '-3 kg'; expected 0.5 to 300 kg"
    """

    def __init__(self, field: str, value: object, expected: str) -> None:
        self.field = field
        self.value = value
        self.expected = expected
        super().__init__(f"{field}: got {_show(value)}; expected {expected}")


def _show(value: object) -> str:
    text = repr(value) if isinstance(value, str) else str(value)
    if len(text) > 80:
        text = text[:77] + "..."
    return text.replace("\n", " ")


def read_text_file(path: str | os.PathLike[str], field: str, expected: str) -> str:
    """The UTF-8 text of a user's file, or an :class:`InputError` naming ``field`` and the path.

    A missing path, a folder, a file that cannot be read or one that is not UTF-8 text all become
    one-line input errors, the same from every loader.

    Parameters
    ----------
    path : str or os.PathLike
        The file to read.
    field : str
        What the file is, as the error should name it (``"inventory"``, ``"scenario"``).
    expected : str
        What would have been accepted, e.g. ``"an existing TOML file"``.

    Examples
    --------
    >>> read_text_file("no/such/file.toml", "inventory", "an existing TOML file")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: inventory: got 'no/such/file.toml'; expected an existing TOML file
    """
    shown = str(path)
    try:
        p = Path(path)
        if not p.is_file():  # a folder, a device or a pipe is never read (it could block)
            raise InputError(field, shown, expected)
        raw = p.read_bytes()
    except (FileNotFoundError, IsADirectoryError, NotADirectoryError, ValueError):
        raise InputError(field, shown, expected) from None
    except OSError as exc:
        raise InputError(field, shown, f"{expected} that can be read ({exc.strerror or exc})") from None
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(field, shown, f"{expected} in UTF-8 text") from None
