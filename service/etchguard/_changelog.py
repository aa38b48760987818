"""The engine's change log hook: every acknowledged state change, in the order applied.

An ``Engine`` built with a ``changelog`` calls ``changelog.record(change)`` once per
mutation, after validating it and before applying it, *while it holds the lock that
orders the mutation*: a net's lock for commits and removals, the registry lock for
deck loads, net opens and closes and blockages. So the order in which changes reach
the log is, per net, the order in which they are applied, and a change is recorded
before the call that made it returns (before the reply is sent). Refused calls
record nothing.

The changes are plain values (engine types, layers as process-step indices of the
deck in force when the change was applied); how they are written down is the log's
business (``_journal`` writes protobuf records).

``record`` may raise ``ChangeLogError`` (the log cannot be written). The change is
then not applied (an open already in the registry is taken out again), so the
engine's held state never runs ahead of the log.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Protocol

from ._errors import EtchguardError
from ._geometry import Rect
from ._nets import Pin, Shape
from ._rules import Deck


class ChangeLogError(EtchguardError):
    """The change log cannot record (disk full, I/O error, closed); changes are refused."""


@dataclass(frozen=True)
class DeckLoaded:
    """A deck was loaded or replaced; ``text`` is its TOML source (needed to replay it)."""

    deck: Deck
    text: str | None


@dataclass(frozen=True)
class NetOpened:
    """A net was opened; its given shapes got the ids ``first_id, first_id + 1, ...``."""

    net: str
    pins: tuple[Pin, ...]
    layer_range: tuple[int, int] | None
    shapes: tuple[Shape, ...]
    first_id: int


@dataclass(frozen=True)
class ShapesCommitted:
    """Shapes were committed to a net with the ids ``first_id, first_id + 1, ...``."""

    net: str
    shapes: tuple[Shape, ...]
    first_id: int


@dataclass(frozen=True)
class ShapesRemoved:
    """Shapes were removed (ripped up) from a net by id."""

    net: str
    ids: tuple[int, ...]


@dataclass(frozen=True)
class NetClosed:
    net: str


@dataclass(frozen=True)
class BlockageDeclared:
    blockage_id: int
    layer: int
    rect: Rect


@dataclass(frozen=True)
class BlockageRemoved:
    blockage_id: int


Change = (DeckLoaded | NetOpened | ShapesCommitted | ShapesRemoved | NetClosed
          | BlockageDeclared | BlockageRemoved)


class ChangeLog(Protocol):
    """Where the engine records its changes (see the module docstring for when)."""

    def record(self, change: Change) -> None: ...


# -- a whole engine's state, for snapshots (Engine.export_state / restore_state) ----------

ShapeRow = tuple[int, int, int, int, int]


@dataclass(frozen=True)
class NetImage:
    """One net as held: pins, layer range, shapes by id, and the id the next shape gets."""

    name: str
    pins: tuple[Pin, ...]
    layer_range: tuple[int, int] | None
    shapes: Mapping[int, ShapeRow]  # id -> (layer step, xlo, ylo, xhi, yhi)
    next_id: int


@dataclass(frozen=True)
class EngineImage:
    """Everything an engine holds that a restart must bring back."""

    deck_text: str | None  # None: no deck loaded
    nets: tuple[NetImage, ...]
    blockages: Mapping[int, tuple[int, Rect]]  # id -> (layer, rect)
    next_blockage_id: int
