r"""The bytes of an audit log, chosen by the type of its source, in blocks cut at line ends.

A log arrives as a path (a string is always a path), an open file, the bytes of an upload, or, through
:func:`estimator.inputs.audit_log.log_from_text`, as CSV text; text is never taken for a path. The log is
read in blocks of about ``block_bytes`` [bytes], each ending at a line end (``\n``, ``\r\n`` or
``\r``) or at the end of the log, so a log larger than memory is never held whole. Every block is
checked as UTF-8 text; leading byte-order marks are dropped.

Examples
--------
>>> src = LogSource.of_text("case_id,time\nA,0\nB,1\nC,2\n", block_bytes=4)
>>> [bytes(b) for b in src.blocks()]
[b'case_id,time\n', b'A,0\n', b'B,1\n', b'C,2\n']
>>> _cut(b"a\r\nb\rc", final=False), _cut(b"a\r", final=False), _cut(b"ab", final=True)
(5, 0, 2)
"""

from __future__ import annotations

import os
import stat
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

from ..errors import InputError

#: Bytes read per block [bytes]: about 50 000 rows of a typical log, some 40 MB while parsed.
BLOCK_BYTES = 4 << 20
_BOM = b"\xef\xbb\xbf"


def _cut(buf: bytes, final: bool) -> int:
    """Length of the leading part of ``buf`` that ends at a line end (all of it at the end of the log).

    A ``\r`` ends a line only when the byte after it is known (it could start ``\r\n``).
    """
    if final:
        return len(buf)
    return max(buf.rfind(b"\n"), buf.rfind(b"\r", 0, len(buf) - 1)) + 1


class LogSource:
    """A log's bytes in blocks that end at line ends, checked as UTF-8, read once.

    Parameters
    ----------
    read : callable
        ``read(n)`` gives the next bytes or text (empty at the end).
    shown, expected : str
        How an error names the source, and what was expected of it.
    close : callable, optional
        Called when the blocks are done (an opened file).
    block_bytes : int
        Bytes per block [bytes].
    size : int, optional
        Size of the log when known [bytes], to size what is kept of it once.
    """

    def __init__(
        self,
        read: Callable[[int], Any],
        shown: str,
        expected: str,
        close: Callable[[], None] | None = None,
        block_bytes: int = BLOCK_BYTES,
        size: int | None = None,
    ) -> None:
        self._read = read
        self.size = size
        self.shown = shown
        self.expected = expected
        self._close = close
        self.block_bytes = max(int(block_bytes), 1)

    # ------------------------------------------------------------------ sources by type
    @classmethod
    def of(cls, source: Any, block_bytes: int = BLOCK_BYTES) -> LogSource:
        """The source of a log given as a path, a file object, or bytes (an upload), chosen by type."""
        if isinstance(source, bytes | bytearray | memoryview):
            view = memoryview(source).cast("B")
            return cls(_slicer(view, bytes), "(upload)", "a CSV file", block_bytes=block_bytes, size=len(view))
        if isinstance(source, str | os.PathLike):
            return cls._of_path(source, block_bytes)
        if hasattr(source, "read"):
            return cls(source.read, "(upload)", "a CSV file", block_bytes=block_bytes)
        raise InputError("log", type(source).__name__, "a path, a file object or the bytes of a CSV file")

    @classmethod
    def of_text(cls, text: str, block_bytes: int = BLOCK_BYTES) -> LogSource:
        """The source of CSV text (never a path)."""
        return cls(_slicer(text, str), "(text)", "CSV text", block_bytes=block_bytes, size=len(text))

    @classmethod
    def _of_path(cls, source: str | os.PathLike, block_bytes: int) -> LogSource:
        if isinstance(source, str) and "\n" in source:
            raise InputError("log", "(text)", "a path to a CSV file; pass CSV text to log_from_text")
        expected = "an existing CSV file"
        shown = str(source)
        try:
            info = Path(source).stat()
            regular = stat.S_ISREG(info.st_mode)
        except (OSError, ValueError):
            regular = False
        if not regular:  # a folder, a device or a pipe is never read (it could block)
            raise InputError("log", shown, expected)
        try:
            handle = open(source, "rb")  # noqa: SIM115 (closed when the blocks are done)
        except (FileNotFoundError, IsADirectoryError, NotADirectoryError, ValueError):
            raise InputError("log", shown, expected) from None
        except OSError as exc:
            raise InputError("log", shown, f"{expected} that can be read ({exc.strerror or exc})") from None
        return cls(handle.read, shown, expected, close=handle.close, block_bytes=block_bytes, size=info.st_size)

    # ------------------------------------------------------------------ reading
    def _next(self) -> bytes:
        try:
            data = self._read(self.block_bytes)
        except OSError as exc:
            raise InputError("log", self.shown, f"{self.expected} that can be read ({exc.strerror or exc})") from None
        if isinstance(data, bytes | bytearray | memoryview):
            return bytes(data)
        try:
            return str(data or "").encode("utf-8")
        except UnicodeEncodeError:
            raise InputError("log", self.shown, "text that UTF-8 can hold (no lone surrogates)") from None

    def _checked(self, block: bytes) -> bytes:
        if not block.isascii():
            try:
                block.decode("utf-8")
            except UnicodeDecodeError:
                raise InputError("log", self.shown, f"{self.expected} in UTF-8 text") from None
        return block

    def blocks(self) -> Iterator[bytes]:
        """The log's bytes in blocks ending at line ends (the first without its byte-order marks).

        Each read of ``block_bytes`` becomes one block, with the part line before it; a block is
        copied at most once and not kept once the next is read.
        """
        carry = b""
        started = False
        try:
            while True:
                data = self._next()
                final = not data
                if not started:
                    data, carry = carry + data, b""
                    while data.startswith(_BOM):
                        data = data[len(_BOM) :]
                    if not final and (not data or _BOM.startswith(data)):
                        carry = data  # the start of a byte-order mark, perhaps: read on
                        continue
                    started = True
                cut = _cut(data, final)
                if not cut and not final:
                    carry += data  # no line end yet: read on
                    continue
                block = carry + data[:cut] if carry or cut < len(data) else data
                carry = data[cut:]
                del data
                if block:
                    yield self._checked(block)
                del block
                if final:
                    return
        finally:
            if self._close is not None:
                self._close()

    def drain(self) -> None:
        """Read the rest of the log, so that a later block that is not UTF-8 is still refused."""
        for _ in self.blocks():
            pass


def _slicer(whole: Any, kind: type) -> Callable[[int], Any]:
    """``read(n)`` over an object in memory (text or bytes), in pieces, never copied whole."""
    pos = 0

    def read(n: int) -> Any:
        nonlocal pos
        piece = kind(whole[pos : pos + n])
        pos += n
        return piece

    return read
