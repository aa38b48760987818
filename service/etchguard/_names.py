"""Names (nets, pins, layers, oxide classes): their length limit, and how a refusal
quotes one.

A name is at most ``MAX_NAME_BYTES`` bytes of UTF-8. A refusal never quotes more
than ``QUOTED_CHARS`` characters of a value (``shown``): refusals travel in status
trailers with a peer limit of 8 KiB, where every non-ASCII byte is percent-encoded
to three characters, so a quoted 10,000-character name would not fit. Cutting a str
is cutting on character (code point) boundaries, so the prefix encodes cleanly.
"""

from __future__ import annotations

from ._errors import InputError

MAX_NAME_BYTES = 256
QUOTED_CHARS = 40


def byte_length(text: str) -> int:
    return len(text.encode("utf-8", "surrogatepass"))


def shown(value: object) -> str:
    """``repr(value)``, or for a long string its first ``QUOTED_CHARS`` characters and
    its size in bytes."""
    if isinstance(value, str) and len(value) > QUOTED_CHARS:
        return f"{value[:QUOTED_CHARS]!r}... ({byte_length(value)} bytes)"
    text = repr(value)
    return text if len(text) <= QUOTED_CHARS + 2 else text[:QUOTED_CHARS] + "..."


def check_length(name: str, what: str, field: str) -> None:
    """Refuse a name longer than MAX_NAME_BYTES (cheap for short ones: a character is
    at most 4 bytes)."""
    if len(name) * 4 > MAX_NAME_BYTES and byte_length(name) > MAX_NAME_BYTES:
        raise InputError(f"{what} of {byte_length(name)} bytes is longer than the limit of "
                         f"{MAX_NAME_BYTES} bytes (UTF-8): {shown(name)}", field)


def check_name(name: object, what: str, field: str) -> str:
    """A non-empty string within the length limit, or InputError naming ``field``."""
    if not isinstance(name, str) or not name:
        raise InputError(f"{what} needs a non-empty name, got {shown(name)}", field)
    check_length(name, f"{what} name", field)
    return name
