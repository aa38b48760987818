"""Reading an input file as text: UTF-8, with or without a byte-order mark.

Every failure is an error of the caller's kind naming the file and, for bytes that are
not UTF-8, the line and column where they are (a stray Latin-1 byte in a comment, a
compressed file given by mistake).
"""

from __future__ import annotations

import codecs
from pathlib import Path

from ._errors import EtchguardError

_GZIP_MAGIC = b"\x1f\x8b"


def line_of(text: str | bytes, offset: int) -> int:
    """The 1-based line of ``offset`` in ``text``."""
    newline = "\n" if isinstance(text, str) else b"\n"
    return text.count(newline, 0, offset) + 1  # type: ignore[arg-type]


def read_text(path: str | Path, what: str, error: type[EtchguardError]) -> str:
    """The file's text; ``what`` says what the file is ("the rule deck") in a refusal."""
    source = str(path)
    try:
        data = Path(path).read_bytes()
    except OSError as exc:
        raise error(f"cannot read {what}: {exc.strerror}", source) from exc
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        start = exc.start + (3 if data.startswith(b"\xef\xbb\xbf") else 0)
        raise _not_utf8(error, what, source, data, start, line_of(data, start), 0) from None


def _not_utf8(error: type[EtchguardError], what: str, source: str, data: bytes, start: int, line: int,
              column_before: int) -> EtchguardError:
    """The refusal of a byte that is not UTF-8 at ``data[start]`` (on ``line``; the line
    began ``column_before`` bytes before ``data`` when ``data`` holds no newline before it)."""
    newline = data.rfind(b"\n", 0, start)
    column = start - (newline + 1) + 1 + (column_before if newline < 0 else 0)
    hint = " (a gzip-compressed file? decompress it first)" if data.startswith(_GZIP_MAGIC) else ""
    return error(f"{what} is not UTF-8 text: byte 0x{data[start]:02x} at column {column}{hint}",
                 f"{source}: encoding", line)


class TextStream:
    """A file's text read in chunks, for a reader that holds only a window of it.

    ``text`` is the window (UTF-8 decoded, a byte-order mark dropped); ``more()`` appends
    the next chunk (at least as much as the window holds, so a value that spans many
    chunks is read in a number of steps logarithmic in its size), ``release(pos)`` drops
    the window's text before ``pos`` once that is a chunk or more, and ``line(pos)``
    names the file's line of a window position. Refusals are ``error`` naming the file.
    """

    CHUNK = 1 << 20  # characters; the window holds about two of them plus the longest value

    def __init__(self, path: str | Path, what: str, error: type[EtchguardError]) -> None:
        self.source, self.what, self.error = str(path), what, error
        try:
            self._file = open(path, "rb")  # noqa: SIM115  (held while the window moves)
        except OSError as exc:
            raise error(f"cannot read {what}: {exc.strerror}", self.source) from exc
        self._decoder = codecs.getincrementaldecoder("utf-8-sig")()
        self.text = ""
        self.eof = False
        self._base_line = 1  # the file's line of text[0]
        self._read_bytes = 0
        self._column = 0  # bytes of the file's last line read so far (for a refusal)
        self._first = True

    def more(self) -> bool:
        """Append the next chunk; False at the end of the file (nothing appended)."""
        if self.eof:
            return False
        try:
            data = self._file.read(max(self.CHUNK, len(self.text)))
        except OSError as exc:
            raise self.error(f"cannot read {self.what}: {exc.strerror}", self.source) from exc
        try:
            chunk = self._decoder.decode(data, final=not data)
        except UnicodeDecodeError as exc:
            start = exc.start
            if self._first and data.startswith(b"\xef\xbb\xbf"):
                start += 3
            line = self._base_line + self.text.count("\n") + data.count(b"\n", 0, start)
            raise _not_utf8(self.error, self.what, self.source, data, start, line, self._column) from None
        self._first = False
        newline = data.rfind(b"\n")
        self._column = len(data) - newline - 1 if newline >= 0 else self._column + len(data)
        if not data:
            self.eof = True
            self._file.close()
        self.text += chunk
        return bool(chunk) or not self.eof

    def release(self, pos: int) -> int:
        """Drop the text before ``pos`` when it is a chunk or more; ``pos`` in the new window."""
        if pos < self.CHUNK:
            return pos
        self._base_line += self.text.count("\n", 0, pos)
        self.text = self.text[pos:]
        return 0

    def line(self, pos: int) -> int:
        return self._base_line + self.text.count("\n", 0, pos)


def write_whole(path: Path, text: str) -> None:
    """Write ``text`` as UTF-8 through a temporary file beside ``path``, then rename it
    over ``path``: a reader sees the old file or the new one, never half of one."""
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
