"""Engine errors -> gRPC status codes, with rich details naming the field.

Every engine error carries ``field`` (a proto field path by the time it gets here)
and ``message``. The status message is ``"<field>: <message>"``, at most
``MAX_MESSAGE_BYTES`` of UTF-8 and the field at most ``MAX_FIELD_BYTES``, both cut on a
character boundary: they travel in the trailers, non-ASCII bytes percent-encoded
(three characters each), and again in the details, and the peer's metadata limit is
8 KiB; a status past it reached clients as a transport error with another code. The
details carry a
``google.rpc.ErrorInfo`` (domain ``etchguard.v1``, reason the status code's name,
metadata ``field``) and, for INVALID_ARGUMENT, a ``google.rpc.BadRequest`` with one
field violation, which is what client libraries show for a bad argument.
"""

from __future__ import annotations

import grpc
from google.protobuf import any_pb2
from google.rpc import error_details_pb2, status_pb2
from grpc_status import rpc_status

from .. import AlreadyExistsError, DeckError, EtchguardError, InputError, LimitExceededError, NoDeckError, NotFoundError
from .._changelog import ChangeLogError
from .._errors import CancelledError, DeadlineExceededError, PeerUnavailableError, WrongShardError

DOMAIN = "etchguard.v1"
# Worst case on the wire: message 1000 B percent-encoded (3,000) + details in base64
# (4/3 of: message, field three times, ~100 B of framing): ~5.6 KB, under 8 KiB.
MAX_MESSAGE_BYTES = 1000
MAX_FIELD_BYTES = 200

CODES: dict[type, grpc.StatusCode] = {
    InputError: grpc.StatusCode.INVALID_ARGUMENT,
    DeckError: grpc.StatusCode.INVALID_ARGUMENT,
    NotFoundError: grpc.StatusCode.NOT_FOUND,
    NoDeckError: grpc.StatusCode.FAILED_PRECONDITION,
    LimitExceededError: grpc.StatusCode.RESOURCE_EXHAUSTED,
    AlreadyExistsError: grpc.StatusCode.ALREADY_EXISTS,
    ChangeLogError: grpc.StatusCode.UNAVAILABLE,  # the journal cannot be written
    WrongShardError: grpc.StatusCode.FAILED_PRECONDITION,  # another shard holds the net
    PeerUnavailableError: grpc.StatusCode.UNAVAILABLE,  # advice needs a shard that is down
    DeadlineExceededError: grpc.StatusCode.DEADLINE_EXCEEDED,  # long work stopped
    CancelledError: grpc.StatusCode.CANCELLED,
}


def code_of(exc: EtchguardError) -> grpc.StatusCode:
    for cls in type(exc).__mro__:
        code = CODES.get(cls)
        if code is not None:
            return code
    return grpc.StatusCode.INVALID_ARGUMENT


def field_path(exc: EtchguardError, prefix: str = "") -> str:
    """The field an error names, under ``prefix`` (e.g. a session op's name)."""
    field = exc.field or ""
    if prefix:
        return f"{prefix}.{field}" if field else prefix
    return field


def cut(text: str, limit: int, mark: str = " ... (cut)") -> str:
    """``text`` within ``limit`` bytes of UTF-8, cut on a character boundary."""
    data = text.encode("utf-8", "replace")
    if len(data) <= limit:
        return text
    return data[:limit - len(mark)].decode("utf-8", "ignore") + mark  # "ignore": a split last char


def describe(exc: EtchguardError, prefix: str = "") -> tuple[grpc.StatusCode, str, str]:
    """(status code, message naming the field, field path) of an engine error, both
    bounded in bytes (module docstring)."""
    field = cut(field_path(exc, prefix), MAX_FIELD_BYTES)
    message = cut(f"{field}: {exc.message}" if field else exc.message, MAX_MESSAGE_BYTES)
    return code_of(exc), message, field


def _pack(detail) -> any_pb2.Any:
    packed = any_pb2.Any()
    packed.Pack(detail)
    return packed


def rich_status(code: grpc.StatusCode, message: str, field: str) -> grpc.Status:
    """A grpc.Status with ErrorInfo (and BadRequest for INVALID_ARGUMENT) details."""
    details = [_pack(error_details_pb2.ErrorInfo(reason=code.name, domain=DOMAIN,
                                                 metadata={"field": field}))]
    if code is grpc.StatusCode.INVALID_ARGUMENT:
        violation = error_details_pb2.BadRequest.FieldViolation(field=field, description=message)
        details.append(_pack(error_details_pb2.BadRequest(field_violations=[violation])))
    status = status_pb2.Status(code=code.value[0], message=message, details=details)
    return rpc_status.to_status(status)
