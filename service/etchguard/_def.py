"""A DEF reader (the open LEF/DEF 5.8 standard): the design as the file states it.

``DefReader.read_header()`` reads everything before the NETS section that nets need:
UNITS, DIEAREA, VIAS (fixed shapes and generated ones), NONDEFAULTRULES widths,
COMPONENTS (macro, placement, orientation), PINS (ports, placement, ANTENNAPIN
statements); SPECIALNETS are counted and left out of antenna checks (power); other
sections are skipped with a warning. ``raw_nets()`` then streams the NETS section one
net at a time (``RawNet``: its pins and its regular wiring as written), and afterwards
reads the rest of the file up to END DESIGN, so a truncated file is still an error.
Nothing here needs the LEF: names are resolved when a net is bound (``_def_bind``).

A section's declared count that differs from what it holds is a warning naming the
section's line. Errors (``InputError``) name file:line and the keyword.
"""

from __future__ import annotations

import gc
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import TypeVar

from ._def_model import WIRING, DefHeader, RawNet, RawPath, coordinate, split_plus
from ._def_sections import SectionReader
from ._errors import InputError
from ._lefdef_geometry import bounding_box
from ._lefdef_tokens import Notes, TokenStream, fail, line_of

_T = TypeVar("_T")

# sections skipped whole (their statements are "- ... ;" up to END name)
_SKIPPED_SECTIONS = {"REGIONS", "PINPROPERTIES", "BLOCKAGES", "SLOTS", "FILLS", "SCANCHAINS", "GROUPS", "STYLES"}
_NEEDED_BEFORE_NETS = {"VIAS", "NONDEFAULTRULES", "COMPONENTS", "PINS"}
_QUIET = {"VERSION", "NAMESCASESENSITIVE", "DIVIDERCHAR", "BUSBITCHARS", "TECHNOLOGY"}


class DefReader:
    """One DEF file: ``read_header()``, then ``raw_nets()`` (see the module doc)."""

    def __init__(self, path: str | Path, notes: Notes | None = None) -> None:
        self.stream = TokenStream(path, notes)
        self.source = self.stream.source
        self.notes = self.stream.notes
        self.header = DefHeader(self.source)
        self._sections = SectionReader(self.stream, self.header)
        self._in_nets = False
        self._nets_declared = (0, 0)
        self._done = False

    # -- sections -------------------------------------------------------------------------

    def _declared(self, section: str) -> tuple[int, int]:
        """``SECTION count ;``: (count, line)."""
        line = self.stream.line
        words, _ = self.stream.statement(section)
        if len(words) != 1:
            raise self.stream.error(section, f"expected {section} count ;")
        return coordinate(words[0], self.source, line, section), line

    def _statements(self, section: str, declared_at: tuple[int, int] | None = None,
                    quick: Callable[[], int] | None = None) -> Iterator[tuple[list[str], list[tuple[int, int]]]]:
        """The section's ``- ...`` statements as words and line marks. ``quick`` first
        takes the common one-line statements that follow, returning how many it took,
        and leaves any other to this loop."""
        stream = self.stream
        declared, line = declared_at or self._declared(section)
        found = 0
        while True:
            if quick is not None:
                found += quick()
            word = stream.peek()
            if word is None:
                raise stream.error(section, f"the file ends inside {section} (truncated, or END {section} missing)")
            if word == "END":
                stream.next(section)
                closing = stream.next(f"END {section}")
                if closing != section:
                    raise stream.error("END", f"END {closing} where END {section} should close the section")
                break
            words, marks = stream.statement(section)
            if not words or words[0] != "-":
                got = words[0] if words else ";"
                raise fail(self.source, marks[0][1], section, f"expected '- name ...' in {section}, got {got!r}")
            found += 1
            yield words, marks
        self.header.counts[section] = (declared, found, line)
        if declared != found:
            self.notes.warn(self.source, line, section, f"declares {declared} but holds {found}")

    def _guarded(self, read: Callable[[list[str], list[tuple[int, int]]], _T], section: str,
                 words: list[str], marks: list[tuple[int, int]]) -> _T:
        """A statement reader whose words run out early, or that finds no ')' it expects,
        is refused naming the statement's line (not an IndexError)."""
        try:
            return read(words, marks)
        except (IndexError, ValueError) as exc:
            name = words[1] if len(words) > 1 else ""
            raise fail(self.source, marks[0][1], section, f"statement {name!r} is cut short or malformed "
                       f"({type(exc).__name__})") from None

    @property
    def nets_declared(self) -> int:
        """The count the NETS section declares (0 before it is reached)."""
        return self._nets_declared[0]

    def read_header(self) -> DefHeader:
        """Everything up to the NETS section (or the end of the design).

        The cyclic garbage collector is paused meanwhile: the header is hundreds of
        thousands of small records (components) that live as long as the read and hold
        no cycles, and the collections their allocation sets off would walk them again
        and again (a third of the header's time). It runs again as it was afterwards."""
        collecting = gc.isenabled()
        gc.disable()
        try:
            while not self._in_nets and not self._done:
                self._top_statement(before_nets=True)
        finally:
            if collecting:
                gc.enable()
        return self.header

    def _top_statement(self, before_nets: bool) -> None:
        stream = self.stream
        keyword = stream.next("END DESIGN")
        up = keyword.upper()
        line = stream.line
        if up == "END":
            closing = stream.next("END DESIGN")
            if closing.upper() != "DESIGN":
                raise stream.error("END", f"END {closing} outside any section (expected END DESIGN)")
            self._done = True
            return
        if not before_nets and up in _NEEDED_BEFORE_NETS:
            raise stream.error(up, f"{up} must come before NETS (nets need it)")
        if up == "UNITS":
            words, _ = stream.statement(up)
            if len(words) != 3 or [w.upper() for w in words[:2]] != ["DISTANCE", "MICRONS"]:
                raise fail(self.source, line, up, "expected UNITS DISTANCE MICRONS value ;")
            dbu = coordinate(words[2], self.source, line, up)
            if dbu <= 0:
                raise fail(self.source, line, up, f"database units per micron must be positive, got {dbu}")
            self.header.dbu = dbu
        elif up == "DESIGN":
            words, _ = stream.statement(up)
            self.header.design = words[0] if words else ""
        elif up == "DIEAREA":
            words, _ = stream.statement(up)
            values = [coordinate(w, self.source, line, up) for w in words if w not in ("(", ")")]
            if len(values) < 4 or len(values) % 2:
                raise fail(self.source, line, up, "expected DIEAREA ( x y ) ( x y ) ... ;")
            box = bounding_box(list(zip(values[0::2], values[1::2])))
            self.header.die_area = (int(box[0]), int(box[1]), int(box[2]), int(box[3]))
        elif up == "VIAS":
            for words, marks in self._statements(up):
                self._guarded(self._sections.via, up, words, marks)
        elif up == "NONDEFAULTRULES":
            for words, marks in self._statements(up):
                self._guarded(self._sections.ndr, up, words, marks)
        elif up == "COMPONENTS":
            for words, marks in self._statements(up, quick=self._sections.placed_components):
                self._guarded(self._sections.component, up, words, marks)
        elif up == "PINS":
            for words, marks in self._statements(up):
                self._guarded(self._sections.pin, up, words, marks)
        elif up == "SPECIALNETS":
            for _ in self._statements(up):
                self.header.special_nets += 1
            self.notes.warn(self.source, line, up, "special (power) nets are left out of antenna checks")
        elif up == "NETS":
            if not before_nets:
                raise stream.error(up, "a second NETS section")
            self._nets_declared = self._declared(up)
            self._in_nets = True
        elif up in _SKIPPED_SECTIONS:
            for _ in self._statements(up):
                pass
            self.notes.warn(self.source, line, up, "section skipped (not used by the antenna model)")
        elif up == "PROPERTYDEFINITIONS":
            while stream.peek() != "END":
                stream.statement(up)
            stream.next(up)
            stream.expect("PROPERTYDEFINITIONS", "END PROPERTYDEFINITIONS")
            self.notes.warn(self.source, line, up, "section skipped (not used by the antenna model)")
        elif up == "BEGINEXT":
            while stream.next("BEGINEXT").upper() != "ENDEXT":
                pass
            self.notes.warn(self.source, line, up, "extension skipped")
        else:
            stream.statement(up)
            if up not in _QUIET:
                self.notes.warn(self.source, line, up, "statement skipped (not used by the antenna model)")

    # -- nets -----------------------------------------------------------------------------

    def raw_nets(self) -> Iterator[RawNet]:
        """Stream the NETS section, then read the rest of the file to END DESIGN."""
        if not self._in_nets and not self._done:
            self.read_header()
        if self._in_nets:
            for words, marks in self._statements("NETS", self._nets_declared):
                net = self._guarded(self._net, "NETS", words, marks)
                if net is not None:
                    yield net
            self._in_nets = False
        while not self._done:
            self._top_statement(before_nets=False)

    def _net(self, words: list[str], marks: list[tuple[int, int]]) -> RawNet | None:
        source, line = self.source, marks[0][1]
        if len(words) < 2:
            raise fail(source, line, "NETS", "a net needs a name")
        name = words[1]
        i, n = 2, len(words)
        if name == "MUSTJOIN" and i < n and words[i] == "(":
            self.notes.warn(source, line, "MUSTJOIN", "a must-join net has no wiring of its own; skipped")
            return None
        connections: list[tuple[str, str, int]] = []
        second_line = marks[1][0] if len(marks) > 1 else n  # words before it are on the first line
        while i < n and words[i] == "(":
            close = i + 3
            if close >= n or words[close] != ")":  # "( component pin )" the common case, else look
                try:
                    close = words.index(")", i)
                except ValueError:
                    raise fail(source, line_of(marks, i), "NETS", f"net {name}: '(' without ')'") from None
                if close - i < 3:
                    raise fail(source, line_of(marks, i), "NETS", f"net {name}: expected ( component pin )")
            connections.append((words[i + 1], words[i + 2], line if i < second_line else line_of(marks, i)))
            i = close + 1
        net = RawNet(name, line, connections, [], None)
        try:
            groups = split_plus(words, i)
        except InputError as exc:
            raise fail(source, line_of(marks, i), "NETS", f"net {name}: {exc.message}") from None
        wiring: list[tuple[int, list[str]]] = []
        for start, group in groups:
            key = group[0].upper() if group else ""
            if key in WIRING:
                del group[0]  # (the group is the statement's copy)
                wiring.append((start + 1, group))
            elif key in ("RECT", "VIRTUAL") and wiring:
                wiring[-1][1].extend(group)  # '+ RECT' / '+ VIRTUAL' continue a path
            elif key == "NONDEFAULTRULE" and len(group) == 2:
                net.rule = group[1]
            elif key == "SUBNET":
                self._subnet(net, group, start, marks)
            else:
                self.notes.warn(source, line_of(marks, start), key or "+", "net attribute skipped "
                                "(not used by the antenna model)")
        for start, group in wiring:
            self._paths(net, group, start, marks)
        return net

    def _subnet(self, net: RawNet, group: list[str], start: int, marks: list[tuple[int, int]]) -> None:
        """+ SUBNET name ( comp pin )... [NONDEFAULTRULE r] [wiring]: part of the net."""
        i = 2
        while i < len(group) and group[i] == "(":
            close = group.index(")", i)
            if group[i + 1] != "VPIN":
                net.connections.append((group[i + 1], group[i + 2], line_of(marks, start + i)))
            i = close + 1
        if i < len(group) and group[i].upper() == "NONDEFAULTRULE":
            self.notes.warn(self.source, line_of(marks, start + i), "SUBNET",
                            "a subnet's own non-default rule is not applied; the net's widths are used")
            i += 2
        if i < len(group) and group[i].upper() in WIRING:
            self._paths(net, group[i + 1:], start + i + 1, marks)

    def _paths(self, net: RawNet, words: list[str], start: int, marks: list[tuple[int, int]]) -> None:
        """``layer [TAPER | TAPERRULE r] [STYLE n] points [NEW layer ...]...``: one
        ``RawPath`` per layer switch, its routing points left as words (the binder walks
        them once, placing shapes as it goes)."""
        source = self.source
        i, n = 0, len(words)
        switches = words.count("NEW")
        while i < n:
            line = line_of(marks, start + i)
            layer = words[i]
            i += 1
            taper, taper_rule = False, None
            if i < n and words[i] == "TAPER":
                taper, i = True, i + 1
            elif i < n and words[i] == "TAPERRULE":
                if i + 1 >= n:
                    raise fail(source, line, "TAPERRULE", f"net {net.name}: TAPERRULE needs a rule name")
                taper_rule, i = words[i + 1], i + 2
            if i < n and words[i] == "STYLE":
                self.notes.warn(source, line, "STYLE", "a wire style has no term in the model; the "
                                "segment is taken as a rectangle of the path's width")
                i += 2
            end = n
            if switches:  # (a missed index would raise: slower)
                switches -= 1
                try:
                    end = words.index("NEW", i)
                except ValueError:  # the word NEW was a rule's name, not a switch
                    end = n
            net.paths.append(RawPath(layer, line, taper, taper_rule, words[i:end]))
            i = end + 1  # past NEW
