"""One exception hierarchy for everything the engine can refuse.

Every error names the field it is about (``field``) so that the gRPC adapter can
map it to a status code and a ``BadRequest`` field violation without parsing text.
"""

from __future__ import annotations

from typing import Any


class EtchguardError(Exception):
    """Base of all errors raised on purpose by etchguard."""

    def __init__(self, message: str, field: str | None = None, line: int | None = None) -> None:
        super().__init__(_located(message, field, line))
        self.message = message
        self.field = field
        self.line = line  # the line of an input file the error is about, when known

    def at_line(self, line: int | None) -> EtchguardError:
        """The same error, placed at ``line`` of the file its field names."""
        return type(self)(self.message, self.field, line)


def _located(message: str, field: str | None, line: int | None) -> str:
    """``field: message``; with a line and a field ``file: path``, ``file:line: path: message``
    (the form editors and terminals jump to)."""
    if field is None:
        return message
    if line is not None:
        source, sep, path = field.partition(": ")
        return f"{source}:{line}: {path}: {message}" if sep else f"{source}:{line}: {message}"
    return f"{field}: {message}"


class DeckError(EtchguardError):
    """The rule deck is malformed; ``field`` is ``file: entry.field``."""


class InputError(EtchguardError):
    """A request carries bad geometry, an unknown layer, NaN, and the like."""


class NotFoundError(EtchguardError):
    """An unknown net or shape id."""


class AlreadyExistsError(EtchguardError):
    """A net was opened twice, or a blockage id asked for is held already."""


class NoDeckError(EtchguardError):
    """A call needs a rule deck and none is loaded."""


class LimitExceededError(EtchguardError):
    """A configured limit (nets held, shapes per net, batch size) would be exceeded."""


class WrongShardError(EtchguardError):
    """A call about a net that another shard holds; ``owner`` is that shard's index."""

    def __init__(self, message: str, field: str | None = None, owner: int = -1) -> None:
        super().__init__(message, field)
        self.owner = owner


class PeerUnavailableError(EtchguardError):
    """A question needs another shard's answer and that shard cannot be reached."""


class StoppedError(EtchguardError):
    """Long work (an advice) stopped before its answer because its caller stopped
    waiting; nothing was changed. ``field`` names what ended it."""


class DeadlineExceededError(StoppedError):
    """The call's deadline passed while its work was under way."""


class CancelledError(StoppedError):
    """The caller cancelled the call (or went away) while its work was under way."""


class ServiceError(EtchguardError):
    """A call a server refused, as the clients raise it: ``code`` (the gRPC status code,
    a ``grpc.StatusCode``), ``message`` and the ``field`` its details name ("" if none).
    The server's own refusals are the classes above; this is how they arrive."""

    def __init__(self, code: Any, message: str, field: str = "") -> None:
        super().__init__(message, field)
        self.args = (f"{code.name}: {message}",)
        self.code = code

    def __str__(self) -> str:
        return str(self.args[0])

    def at_line(self, line: int | None) -> ServiceError:
        return self  # a server's answer has no line of a local file
