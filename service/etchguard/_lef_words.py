"""Small helpers of the LEF reader: one statement's words, and the ends of blocks."""

from __future__ import annotations

import math

from ._errors import InputError
from ._lef_model import Located
from ._lefdef_tokens import TokenStream, fail, line_of


class Words:
    """The words of one statement after its keyword, with typed access that names
    file:line and the keyword on every refusal."""

    def __init__(self, stream: TokenStream, keyword: str) -> None:
        self.stream, self.keyword = stream, keyword
        self.items, self.marks = stream.statement(keyword)
        self.at = Located(stream.source, self.marks[0][1])

    @classmethod
    def of(cls, items: list[str], keyword: str, at: Located, stream: TokenStream) -> Words:
        words = cls.__new__(cls)
        words.stream, words.keyword, words.items = stream, keyword, items
        words.marks, words.at = [(0, at.line)], at
        return words

    def __len__(self) -> int:
        return len(self.items)

    def text(self, index: int) -> str:
        if index >= len(self.items):
            raise self.error("a value is missing")
        return self.items[index]

    def parse(self, word: str) -> float:
        try:
            value = float(word)
        except ValueError:
            raise self.error(f"expected a number, got {word!r}") from None
        if not math.isfinite(value):
            raise self.error(f"expected a finite number, got {word!r}")
        return value

    def number(self, index: int) -> float:
        return self.parse(self.text(index))

    def single_number(self, positive: bool = False) -> float:
        if len(self.items) != 1:
            raise self.error(f"expected one number, got {' '.join(self.items) or 'none'}")
        value = self.number(0)
        if value < 0 or (positive and value == 0):
            raise self.error(f"must be {'positive' if positive else 'non-negative'}, got {self.items[0]}")
        return value

    def line(self, index: int) -> int:
        return line_of(self.marks, index)

    def error(self, message: str) -> InputError:
        return fail(self.at.source, self.at.line, self.keyword, message)

    def warn(self, message: str) -> None:
        self.stream.notes.warn(self.at.source, self.at.line, self.keyword, message)


def finish_block(stream: TokenStream, kind: str, name: str, optional_name: bool = False) -> None:
    """After ``END``: the block's name must follow (LEF closes blocks by name)."""
    following = stream.peek()
    if following == name:
        stream.next(kind)
        return
    if optional_name:
        stream.warn("END", f"{kind} {name} closed by END without its name")
        return
    raise stream.error("END", f"END {following or '(end of file)'} where END {name} should close "
                       f"{kind} {name} (an END is missing or misspelt)")


def skip_until_end(stream: TokenStream, kind: str, name: str) -> None:
    """Skip a block up to ``END name``; the file ending first is an error."""
    while True:
        word = stream.next(f"{kind} {name}")
        if word.upper() == "END":
            following = stream.peek()
            if following is not None and (following == name or following.upper() == name.upper()):
                stream.next(kind)
                return


def skip_current_density(stream: TokenStream, keyword: str) -> None:
    """ACCURRENTDENSITY / DCCURRENTDENSITY: one statement, or a table of several
    (FREQUENCY, WIDTH or CUTAREA, then TABLEENTRIES) that must not be read as the
    layer's own WIDTH."""
    first, marks = stream.statement(keyword)
    stream.warn(keyword, "current density skipped (not used by the antenna model)", marks[0][1])
    if len(first) == 2:
        try:
            float(first[1])
            return
        except ValueError:
            pass
    if first and len(first) > 1 and first[1].upper() == "TABLEENTRIES":
        return
    while True:
        words, _ = stream.statement(keyword)
        if words and words[0].upper() == "TABLEENTRIES":
            return


def rect_words(items: list[str]) -> list[str]:
    """The coordinates of a shape statement: MASK n, ITERATE and brackets dropped."""
    out: list[str] = []
    skip = False
    for word in items:
        if skip:
            skip = False
            continue
        up = word.upper()
        if up == "MASK":
            skip = True
        elif up not in ("ITERATE", "(", ")"):
            out.append(word)
    return out
