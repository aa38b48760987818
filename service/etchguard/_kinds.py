"""The package's kinds of things, each an enum of the words users read and write.

They are ``StrEnum``s: a member is its word (``Measure.AREA == "area"``), so a deck's
``measure = "side"``, a JSON key and the text output read and print the same word, and
type checkers still tell one kind from another.
"""

from __future__ import annotations

from enum import StrEnum


class LayerKind(StrEnum):
    ROUTING = "routing"  # a metal layer
    CUT = "cut"  # a via layer


class Measure(StrEnum):
    """The core's order: its Measure 0, 1."""

    AREA = "area"  # conductor area
    SIDE = "side"  # side-wall area (perimeter x thickness)


class RatioKind(StrEnum):
    """The core's order: its Kind 0, 1."""

    PARTIAL = "partial"  # this step's ratio
    CUMULATIVE = "cumulative"  # the sum over the steps that feed it


class Verdict(StrEnum):
    """A net's, a check's or a candidate's verdict, in every output (text, JSON, CSV,
    HTML): the words of the JSON's ``legal`` field, said as a word."""

    LEGAL = "legal"  # every utilization within its limit
    ILLEGAL = "illegal"  # some utilization over its limit

    @classmethod
    def of(cls, legal: bool) -> Verdict:
        return cls.LEGAL if legal else cls.ILLEGAL


class OptionStatus(StrEnum):
    """A layer option's verdict: the net's verdict words, or ``blocked`` when it is
    legal but another net or a blockage is in the way."""

    LEGAL = "legal"  # antenna-legal and nothing in the way
    ILLEGAL = "illegal"  # breaks a limit
    BLOCKED = "blocked"  # another net or a blockage is in the way


class LimitedBy(StrEnum):
    """What stopped a jumper's kept length from being longer."""

    NONE = ""  # no jumper answer
    LIMIT = "limit"  # 1 DBU more breaks a limit
    HOP_ROOM = "hop_room"  # 1 DBU more leaves no room for the hop's via stacks
    RUN = "run"  # the whole run stays: no hop needed
