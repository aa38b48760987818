"""Tokens of the LEF and DEF languages (the open LEF/DEF 5.8 standard), with file:line.

Both languages are whitespace-separated words; ``;`` ends a statement, ``(`` and ``)``
bracket points, ``"..."`` is one word that may hold blanks, and ``#`` at the start of a
word comments out the rest of its line. Writers do not always leave blanks around the
punctuation, so ``;``, ``(`` and ``)`` are split off words here.

The stream reads the file a block of whole lines at a time (memory stays flat however
long it is), decodes and splits a block at once, and goes line by line through a block
that holds a quote, a comment or a byte that is not UTF-8 (so that a bad byte is
reported with its line); it hands
out words one at a time (``next``/``peek``, for the LEF reader and DEF headers) or a
whole statement up to its ``;`` (``statement``, the fast path for DEF's big sections).

``Notes`` collects warnings: every statement a reader skips or cannot express names its
file:line and keyword there. A big file repeats the same warning thousands of times,
so only the first few of each (keyword, message) are kept, with a count of the rest.
"""

from __future__ import annotations

import io
import math
import re
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import BinaryIO

from ._errors import InputError

_QUOTED_OR_WORD = re.compile(r'"[^"]*"|[^\s"]+|"')


def _spaced(text: str) -> str:
    """Blanks around ; ( and ) (three C-level passes: far quicker than str.translate)."""
    return text.replace("(", " ( ").replace(")", " ) ").replace(";", " ; ")


def where(source: str, line: int) -> str:
    return f"{source}:{line}"


def fail(source: str, line: int, keyword: str, message: str) -> InputError:
    """The error every reader raises: field ``file:line: KEYWORD``."""
    return InputError(message, f"{where(source, line)}: {keyword}")


def _split_careful(text: str, source: str, line: int) -> list[str]:
    """Words of a line holding a quote or a comment (the slow, exact path)."""
    words: list[str] = []
    for match in _QUOTED_OR_WORD.finditer(text):
        word = match.group()
        if word == '"':
            raise fail(source, line, "string", "a quoted string is not closed on its line")
        if word.startswith("#"):
            break
        if word.startswith('"'):
            words.append(word)
        else:
            words.extend(_spaced(word).split())
    return words


def lines_of(path: Path, source: str, notes: Notes | None = None) -> Iterator[tuple[int, list[str]]]:
    """(line number, words) of every line that has words, read lazily."""
    try:
        with open(path, "rb") as handle:
            yield from _decoded_lines(handle, source, notes)
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", source) from exc


def _decoded_lines(handle: BinaryIO, source: str, notes: Notes | None) -> Iterator[tuple[int, list[str]]]:
    number = 0
    while True:
        chunk = handle.readlines(_CHUNK)
        if not chunk:
            return
        try:
            text = b"".join(chunk).decode("utf-8")
        except UnicodeDecodeError:
            text = ""
        if text and "#" not in text and '"' not in text:
            # the common case: a block of plain lines decoded and spaced at once
            lines = _spaced(text).split("\n")
            for words in map(str.split, lines[:len(chunk)]):
                number += 1
                if words:
                    yield number, words
            continue
        for raw in chunk:
            number += 1
            words = _careful_line(raw, source, number, notes)
            if words:
                yield number, words


_CHUNK = 1 << 18  # bytes of whole lines decoded at once


def _careful_line(raw: bytes, source: str, number: int, notes: Notes | None) -> list[str]:
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        # A stray byte inside a comment harms nothing (the standard's own example
        # files have one); anywhere else it is refused.
        words = _split_careful(raw.decode("utf-8", errors="replace"), source, number)
        if any("\ufffd" in word for word in words):
            raise fail(source, number, "encoding", f"not UTF-8 text (byte {exc.start + 1} of the "
                       f"line is {raw[exc.start]:#04x})") from exc
        if notes is not None:
            notes.warn(source, number, "encoding", "a byte that is not UTF-8 in a comment; ignored")
        return words  # those before the comment
    if "#" in text or '"' in text:
        return _split_careful(text, source, number)
    return _spaced(text).split()


@dataclass
class Note:
    source: str
    line: int
    keyword: str
    message: str
    subject: str = ""  # what it is about (a component, a pin), kept out of the kind

    def __str__(self) -> str:
        about = f"{self.subject}: " if self.subject else ""
        return f"{where(self.source, self.line)}: {self.keyword}: {about}{self.message}"


@dataclass
class Notes:
    """Warnings of one read. Keeps the first ``keep`` of each kind and counts the rest."""

    keep: int = 3
    kept: list[Note] = field(default_factory=list)
    counts: dict[tuple[str, str], int] = field(default_factory=dict)

    def warn(self, source: str, line: int, keyword: str, message: str, subject: str = "") -> None:
        """Count a warning of kind (keyword, message); keep the first few whole. Names of
        single objects go in ``subject`` so that a kind stays one kind however many."""
        key = (keyword, message)
        seen = self.counts.get(key, 0)
        self.counts[key] = seen + 1
        if seen < self.keep:
            self.kept.append(Note(source, line, keyword, message, subject))

    @property
    def total(self) -> int:
        return sum(self.counts.values())

    def count(self, keyword: str) -> int:
        return sum(n for (k, _), n in self.counts.items() if k == keyword)

    def summary(self) -> list[str]:
        """One line per kept warning, then one per kind with more than were kept."""
        out = [str(note) for note in self.kept]
        for (keyword, message), n in self.counts.items():
            if n > self.keep:
                out.append(f"... {keyword}: {message}: {n - self.keep} more")
        return out


class TokenStream:
    """Words of one file with their line numbers; nothing is read ahead of a line."""

    def __init__(self, path: str | Path, notes: Notes | None = None, text: str | None = None) -> None:
        """The words of the file at ``path``, or of ``text`` (then ``path`` only names it)."""
        self.path = Path(path)
        self.source = str(path)
        self.notes = notes if notes is not None else Notes()
        self._lines = (lines_of(self.path, self.source, self.notes) if text is None else
                       _decoded_lines(io.BytesIO(text.encode("utf-8")), self.source, self.notes))
        self._words: list[str] = []
        self._pos = 0
        self.line = 0  # line of the word last handed out (or of the current line)

    def _fill(self) -> bool:
        for number, words in self._lines:
            self._words, self._pos, self.line = words, 0, number
            return True
        return False

    def at_end(self) -> bool:
        return self._pos >= len(self._words) and not self._fill()

    def peek(self) -> str | None:
        if self._pos >= len(self._words) and not self._fill():
            return None
        return self._words[self._pos]

    def next(self, what: str) -> str:
        """The next word; ``what`` names what was expected if the file ends here."""
        if self._pos >= len(self._words) and not self._fill():
            raise self.error(what, "the file ends here (truncated, or an END is missing)")
        word = self._words[self._pos]
        self._pos += 1
        return word

    def expect(self, word: str, keyword: str) -> None:
        got = self.next(keyword)
        if got != word:
            raise self.error(keyword, f"expected {word!r}, got {got!r}")

    def number(self, keyword: str) -> float:
        word = self.next(keyword)
        try:
            value = float(word)
        except ValueError:
            raise self.error(keyword, f"expected a number, got {word!r}") from None
        if not math.isfinite(value):
            raise self.error(keyword, f"expected a finite number, got {word!r}")
        return value

    def integer(self, keyword: str) -> int:
        word = self.next(keyword)
        try:
            return int(word)
        except ValueError:
            raise self.error(keyword, f"expected an integer, got {word!r}") from None

    def statement(self, keyword: str) -> tuple[list[str], list[tuple[int, int]]]:
        """Every word up to the next ``;`` (not included), and (word index, line) marks
        of where each line of the statement starts, for error messages."""
        words, pos, line = self._words, self._pos, self.line
        if not pos and words and words[-1] == ";" and words.index(";") == len(words) - 1:
            self._pos = len(words)  # a statement that is its line, the common case
            return words[:-1], [(0, line)]
        out: list[str] = []
        marks: list[tuple[int, int]] = []
        lines = self._lines
        while True:
            if pos >= len(words):
                following = next(lines, None)  # the next line with words
                if following is None:
                    self._words, self._pos, self.line = words, pos, line
                    raise self.error(keyword, "the file ends inside a statement (a ';' is missing)")
                (line, words), pos = following, 0
            marks.append((len(out), line))
            # most lines hold no ';' or end with it; a missed index would raise, which costs more
            end = words.index(";", pos) if ";" in words and (words[-1] == ";" or ";" in words[pos:]) else -1
            if end >= 0:
                out.extend(words[pos:end])
                self._words, self._pos, self.line = words, end + 1, line
                return out, marks
            out.extend(words[pos:] if pos else words)
            pos = len(words)

    def whole_lines(self) -> Iterator[tuple[int, list[str]]]:
        """The following lines (number, words), each taken whole as it is handed out,
        for a reader that matches common one-line statements without going word by word;
        nothing while the current line has words left. ``unread_line()`` gives the last
        one back (a line the reader does not match, read then by ``statement``)."""
        if self._pos < len(self._words):
            return
        for number, words in self._lines:
            self._words, self._pos, self.line = words, len(words), number
            yield number, words

    def unread_line(self) -> None:
        """The line ``whole_lines`` handed out last is read again from its first word."""
        self._pos = 0

    def skip_statement(self, keyword: str) -> None:
        self.statement(keyword)

    def error(self, keyword: str, message: str) -> InputError:
        return fail(self.source, self.line, keyword, message)

    def warn(self, keyword: str, message: str, line: int | None = None) -> None:
        self.notes.warn(self.source, self.line if line is None else line, keyword, message)


def line_of(marks: list[tuple[int, int]], index: int) -> int:
    """The line of word ``index`` of a statement from its marks."""
    line = marks[0][1]
    for start, number in marks:
        if start > index:
            break
        line = number
    return line
