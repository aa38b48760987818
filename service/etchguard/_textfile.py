"""Reading an input file as text: UTF-8, with or without a byte-order mark.

Every failure is an error of the caller's kind naming the file and, for bytes that are
not UTF-8, the line and column where they are (a stray Latin-1 byte in a comment, a
compressed file given by mistake).
"""

from __future__ import annotations

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
        line = line_of(data, start)
        column = start - (data.rfind(b"\n", 0, start) + 1) + 1
        hint = " (a gzip-compressed file? decompress it first)" if data.startswith(_GZIP_MAGIC) else ""
        raise error(f"{what} is not UTF-8 text: byte 0x{data[start]:02x} at column {column}{hint}",
                    f"{source}: encoding", line) from None


def write_whole(path: Path, text: str) -> None:
    """Write ``text`` as UTF-8 through a temporary file beside ``path``, then rename it
    over ``path``: a reader sees the old file or the new one, never half of one."""
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
