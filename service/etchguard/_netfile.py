"""Reading a JSON net file (``{"nets": [...]}``) one net at a time.

The file is read in chunks (``TextStream``) and each net decoded on its own with the
standard library's ``raw_decode`` from its offset, validated and handed on; the text
before the net is then let go. So a checker holds a window of the text a few chunks
long plus one net, never the file: memory is bounded by the largest net, not by the
file (decoded JSON takes several times the bytes of its text). A value cut by the end
of the window is decoded again once more text is read. Knowing each net's offset also
lets a refusal name its line: the line of the very field when it can be found, else the
line where the net starts.
"""

from __future__ import annotations

import json
import re
import sys
from collections.abc import Generator, Iterator
from pathlib import Path
from typing import Any

from ._errors import InputError
from ._names import shown
from ._textfile import TextStream

# Deeper than any net file needs (a rectangle sits at depth 6), far below the depth at
# which Python's JSON reader runs out of stack.
MAX_DEPTH = 64
_FORM = 'a net file is a JSON object {"nets": [...]}'
_WHITESPACE = re.compile(r"[ \t\n\r]*")
_DECODER = json.JSONDecoder()
_PATH_STEP = re.compile(r"\.([^.\[]+)|\[(\d+)\]")
# JSON tokens that can hold digits: strings (skipped) and numbers.
_TOKEN = re.compile(r'"(?:[^"\\]|\\.)*"|-?\d+(?:\.\d+)?(?:[eE][+-]?\d+)?')
# A decoding failure this close to the end of the window may be a value the window cuts
# (a number, "true", a key and its colon): read on and decode again.
_CUT_MARGIN = 64


def _skip(text: str, pos: int) -> int:
    match = _WHITESPACE.match(text, pos)
    assert match is not None  # the pattern matches the empty string
    return match.end()


class NetFileReader:
    """The nets of one file as ``(index, decoded JSON, offset)``, in file order. An
    offset is a position in ``text``, the window, valid until the next net is asked for."""

    def __init__(self, path: str | Path) -> None:
        self.stream = TextStream(path, "the net file", InputError)
        self.source = self.stream.source

    @property
    def text(self) -> str:
        return self.stream.text

    def fail(self, message: str, pos: int, where: str = "") -> InputError:
        field = f"{self.source}: {where}" if where else self.source
        return InputError(message, field, self.stream.line(pos))

    def _skip(self, pos: int) -> int:
        """Past whitespace, with text after it unless the file ends."""
        while True:
            pos = _skip(self.text, pos)
            if pos < len(self.text) or not self.stream.more():
                return pos

    def _expect(self, char: str, pos: int, what: str) -> int:
        pos = self._skip(pos)
        if not self.text.startswith(char, pos):
            got = "the end of the file" if pos >= len(self.text) else repr(self.text[pos])
            raise self.fail(f"expected {char!r} {what}, got {got}; {_FORM}", pos)
        return pos + 1

    def _value(self, pos: int, where: str) -> tuple[Any, int]:
        """Decode one JSON value at ``pos``, every failure an InputError with its line."""
        while True:
            try:
                value, end = _DECODER.raw_decode(self.text, pos)
            except json.JSONDecodeError as exc:
                cut = exc.pos >= len(self.text) - _CUT_MARGIN or exc.msg.startswith("Unterminated")
                if cut and self.stream.more():
                    continue
                raise self.fail(f"not valid JSON: {exc.msg} (column {exc.colno})", exc.pos, where) from None
            except RecursionError:
                if self.stream.more():
                    continue
                deep = self._too_deep(pos)
                raise self.fail(f"JSON nested more than {MAX_DEPTH} levels deep", deep, where) from None
            except ValueError:  # an integer of more digits than Python converts
                if self.stream.more():
                    continue
                long_at, digits = self._long_integer(pos)
                raise self.fail(f"an integer of {digits} digits; coordinates are DBU strictly inside "
                                "+-2^62 (at most 19 digits)", long_at, where) from None
            if end < len(self.text) or self.stream.eof or not isinstance(value, (int, float)):
                return value, end
            self.stream.more()  # a number the window ends in may go on: read on, decode again

    def _too_deep(self, pos: int) -> int:
        depth = 0
        for match in re.finditer(r'"(?:[^"\\]|\\.)*"|[\[{]|[\]}]', self.text[pos:]):
            token = match.group()
            if token in "[{":
                depth += 1
                if depth > MAX_DEPTH:
                    return pos + match.start()
            elif token in "]}":
                depth -= 1
        return pos

    def _long_integer(self, pos: int) -> tuple[int, int]:
        for match in _TOKEN.finditer(self.text, pos):
            token = match.group()
            if not token.startswith('"') and len(token) > sys.get_int_max_str_digits():
                return match.start(), len(token.lstrip("-"))
        return pos, 0

    def nets(self) -> Iterator[tuple[int, Any, int]]:
        pos = self._skip(0)
        if pos >= len(self.text):
            raise self.fail(f"the file is empty; {_FORM}", pos)
        if self.text[pos] != "{":
            self._value(pos, "")  # a JSON syntax error is named as such
            raise self.fail(_FORM, pos)
        pos = self._skip(pos + 1)
        seen_nets = False
        while not self.text.startswith("}", pos):
            key, pos = self._value(pos, "")
            if not isinstance(key, str):
                raise self.fail("an object key must be a string", pos)
            pos = self._expect(":", pos, f"after {shown(key)}")
            if key != "nets":
                raise self.fail(f"unknown key {shown(key)} (a net file has only 'nets')", pos, shown(key))
            if seen_nets:
                raise self.fail("'nets' is given twice", pos, "nets")
            seen_nets = True
            pos = yield from self._net_list(self._skip(pos))
            pos = self._skip(pos)
            if self.text.startswith(",", pos):
                pos = self._skip(pos + 1)
            elif not self.text.startswith("}", pos):
                self._expect("}", pos, "closing the file's object")
        if not seen_nets:
            raise self.fail(f"no 'nets' list; {_FORM}", pos)
        end = self._skip(pos + 1)
        if end < len(self.text):
            raise self.fail("text after the end of the file's JSON object", end)

    def _net_list(self, pos: int) -> Generator[tuple[int, Any, int], None, int]:
        if not self.text.startswith("[", pos):
            raise self.fail("'nets' must be a list of net objects", pos, "nets")
        pos = self._skip(pos + 1)
        index = 0
        while not self.text.startswith("]", pos):
            value, end = self._value(pos, f"nets[{index}]")
            yield index, value, pos
            index += 1
            pos = self._skip(self.stream.release(end))
            if self.text.startswith(",", pos):
                pos = self._skip(pos + 1)
            elif not self.text.startswith("]", pos):
                self._expect("]", pos, "closing the 'nets' list")
        if index == 0:
            raise self.fail("the 'nets' list is empty: nothing to check", pos, "nets")
        return pos + 1

    def line_of_field(self, net_offset: int, path: str) -> int:
        """The line of ``path`` (``.pins[0].rects[1]``) inside the net at ``net_offset``;
        the deepest part of it that exists (a missing key: its object)."""
        return self.stream.line(_locate(self.text, net_offset, path))


def _locate(text: str, pos: int, path: str) -> int:
    try:
        for key, index in _PATH_STEP.findall(path):
            pos = _skip(text, pos)
            pos = _member(text, pos, key) if key else _element(text, pos, int(index))
    except (LookupError, ValueError):
        pass  # the path leaves the text here: the last position found stands
    return pos


def _member(text: str, pos: int, key: str) -> int:
    if text[pos] != "{":
        raise LookupError(key)
    pos = _skip(text, pos + 1)
    while text[pos] != "}":
        name, pos = _DECODER.raw_decode(text, pos)
        pos = _skip(text, _skip(text, pos) + 1)  # past ':'
        if name == key:
            return pos
        pos = _skip(text, _DECODER.raw_decode(text, pos)[1])
        if text[pos] == ",":
            pos = _skip(text, pos + 1)
    raise LookupError(key)


def _element(text: str, pos: int, index: int) -> int:
    if text[pos] != "[":
        raise LookupError(index)
    pos = _skip(text, pos + 1)
    for _ in range(index):
        pos = _skip(text, _DECODER.raw_decode(text, pos)[1])
        if text[pos] != ",":
            raise LookupError(index)
        pos = _skip(text, pos + 1)
    return pos
