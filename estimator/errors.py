"""The one error type users see.

Every rejected input raises :class:`InputError`, which names the field, the value given and what
would have been valid. The CLI prints ``str(error)`` as a single line and exits with status 2.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from pathlib import Path

#: The bytes of each file :func:`read_text_file` read inside :func:`reads_recorded` (resolved path ->
#: bytes); None outside it, so nothing is kept by a library user who never asks.
_READS: ContextVar[dict[Path, bytes] | None] = ContextVar("_READS", default=None)


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
        log = _READS.get()
        if log is not None:
            log[p.resolve()] = raw
    except (FileNotFoundError, IsADirectoryError, NotADirectoryError, ValueError):
        raise InputError(field, shown, expected) from None
    except OSError as exc:
        raise InputError(field, shown, f"{expected} that can be read ({exc.strerror or exc})") from None
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(field, shown, f"{expected} in UTF-8 text") from None


@contextmanager
def reads_recorded() -> Iterator[dict[Path, bytes]]:
    """Keep the bytes of every file :func:`read_text_file` reads in this context.

    The command line runs each verb inside it, so that the provenance of a ``--json`` document
    digests the bytes the result was computed from, not a second read that could differ.

    Yields
    ------
    dict
        Resolved path -> the bytes read (filled as files are read).

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as d, reads_recorded() as log:
    ...     f = Path(d) / "a.toml"
    ...     _ = f.write_bytes(b"x = 1")
    ...     _ = read_text_file(f, "scenario", "an existing TOML file")
    ...     _ = f.write_bytes(b"x = 2")
    ...     bytes_read(f)
    b'x = 1'
    """
    log: dict[Path, bytes] = {}
    token = _READS.set(log)
    try:
        yield log
    finally:
        _READS.reset(token)


def bytes_read(path: str | os.PathLike[str]) -> bytes:
    """The bytes of ``path`` as :func:`read_text_file` read them inside :func:`reads_recorded`, else
    the file's bytes now (a file read in blocks, such as an audit log, is not recorded).

    Examples
    --------
    >>> bytes_read(Path(__file__)).startswith(b"#") or bytes_read(Path(__file__))[:3] == b'"' * 3
    True
    """
    p = Path(path)
    log = _READS.get()
    if log is not None:
        resolved = p.resolve()
        if resolved in log:
            return log[resolved]
    return p.read_bytes()
