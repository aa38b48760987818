"""Who may talk to the server, and what reaches the servicer at all.

* Addresses: plaintext is served on loopback (127.0.0.0/8, ::1, localhost) and unix
  sockets only. Any other listen address needs TLS (``--tls-cert`` and ``--tls-key``,
  PEM); ``check_listen`` refuses the configuration at start otherwise. With a
  certificate given, every TCP address is served over TLS, loopback included.
  ``--tls-client-ca`` additionally requires and verifies client certificates.
* Token: with ``--token-file``, every call must carry the metadata
  ``authorization: Bearer <token>``; others get UNAUTHENTICATED. Health checks
  (``grpc.health.v1.Health``) stay open so that a farm's probes need no secret. A
  refused call is logged with its method, peer and reason, never the token given.
* Malformed requests: a request whose bytes do not decode as its message is answered
  INVALID_ARGUMENT naming ``request`` (grpc's own answer would be INTERNAL).
* Metrics: the Prometheus endpoint is plain HTTP without a token, so it binds a
  loopback address unless the operator says ``--metrics-beyond-loopback``.
* A token file that the group or others may read is loaded, with a warning
  (``token file readable by others``, file and mode; never the token).
"""

from __future__ import annotations

import hmac
import ipaddress
import logging
import os
import stat
from pathlib import Path
from typing import Any

import grpc

from . import errors

log = logging.getLogger("etchguard.server")

OPEN_METHODS = frozenset({"/grpc.health.v1.Health/Check", "/grpc.health.v1.Health/Watch"})


def _read(path: Path, what: str, option: str) -> bytes:
    from .app import ServeError  # app imports this module

    try:
        return Path(path).read_bytes()
    except OSError as exc:
        raise ServeError(f"cannot read the {what} {path}: {exc.strerror}", option) from None


def is_local(address: str) -> bool:
    """A unix socket or a loopback host: plaintext may be served there."""
    if address.startswith("unix:"):
        return True
    host = address.rsplit(":", 1)[0].strip("[]")
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False  # a host name or "" / "0.0.0.0"-like wildcard: not known to be local


def check_listen(config) -> None:
    """Refuse a configuration that would serve plaintext beyond this machine, or half a TLS setup."""
    from .app import ServeError

    if bool(config.tls_cert) != bool(config.tls_key):
        raise ServeError("--tls-cert and --tls-key go together", "tls")
    if config.tls_client_ca and not config.tls_cert:
        raise ServeError("--tls-client-ca needs --tls-cert and --tls-key", "tls")
    if config.tls_cert:
        return
    remote = [a for a in config.listen if not is_local(a)]
    if remote:
        raise ServeError(f"listening on {remote[0]} needs TLS: give --tls-cert and --tls-key "
                         "(plaintext is served on loopback addresses and unix sockets only)", "listen")


def check_metrics(config) -> None:
    """Refuse a metrics endpoint beyond loopback unless the operator asked for it."""
    from .app import ServeError

    if config.metrics_port is None or config.metrics_beyond_loopback:
        return
    if not is_local(f"{config.metrics_address}:{config.metrics_port}"):
        raise ServeError(f"metrics on {config.metrics_address} would be served beyond this machine "
                         "as plain HTTP without a token; bind a loopback address (and put a proxy "
                         "with TLS in front), or give --metrics-beyond-loopback to do it anyway",
                         "metrics_address")


def server_credentials(config) -> grpc.ServerCredentials | None:
    """TLS credentials for every TCP address when a certificate is configured."""
    if not config.tls_cert:
        return None
    cert = _read(config.tls_cert, "TLS certificate", "tls_cert")
    key = _read(config.tls_key, "TLS key", "tls_key")
    client_ca = _read(config.tls_client_ca, "client CA", "tls_client_ca") if config.tls_client_ca else None
    return grpc.ssl_server_credentials([(key, cert)], root_certificates=client_ca,
                                       require_client_auth=client_ca is not None)


def read_token(path: Path) -> str:
    from .app import ServeError

    token = _read(path, "token file", "token_file").decode("utf-8", "replace").strip()
    mode = stat.S_IMODE(os.stat(path).st_mode)
    if mode & 0o077:  # warned, not refused: the operator may share it with a group on purpose
        log.warning("token file readable by others", extra={"fields": {
            "file": str(path), "mode": oct(mode), "advice": "chmod 600"}})
    if not token or any(c.isspace() for c in token):
        raise ServeError(f"the token file {path} must hold one token without spaces", "token_file")
    return token


def _refusing_handler(handler: grpc.RpcMethodHandler, method: str, reason: str) -> grpc.RpcMethodHandler:
    """A handler of the same shape as ``handler`` that answers UNAUTHENTICATED."""

    def refuse(_request: Any, context: grpc.ServicerContext):
        log.warning("unauthenticated call refused", extra={"fields": {
            "method": method, "peer": context.peer(), "reason": reason}})
        context.abort(grpc.StatusCode.UNAUTHENTICATED,
                      "authorization: a bearer token is required (metadata 'authorization: Bearer <token>')")

    kw = dict(request_deserializer=handler.request_deserializer,
              response_serializer=handler.response_serializer)
    if handler.request_streaming and handler.response_streaming:
        return grpc.stream_stream_rpc_method_handler(refuse, **kw)
    if handler.request_streaming:
        return grpc.stream_unary_rpc_method_handler(refuse, **kw)
    if handler.response_streaming:
        return grpc.unary_stream_rpc_method_handler(refuse, **kw)
    return grpc.unary_unary_rpc_method_handler(refuse, **kw)


class TokenInterceptor(grpc.ServerInterceptor):
    """Lets a call through only with ``authorization: Bearer <token>`` (health is open)."""

    def __init__(self, token: str) -> None:
        self._expected = f"Bearer {token}".encode()

    def intercept_service(self, continuation, handler_call_details):
        method = handler_call_details.method
        handler = continuation(handler_call_details)
        if handler is None or method in OPEN_METHODS:
            return handler
        given = [v for k, v in (handler_call_details.invocation_metadata or ()) if k == "authorization"]
        if not given:
            reason = "no authorization metadata"
        else:
            value = given[0].encode() if isinstance(given[0], str) else bytes(given[0])
            if hmac.compare_digest(value, self._expected):  # constant time: no timing hints
                return handler
            reason = "not a bearer token" if not value.startswith(b"Bearer ") else "wrong token"
        return _refusing_handler(handler, method, reason)


class _Undecodable:
    """What a request that does not parse becomes, so the handler can answer for it."""

    def __init__(self, error: Exception) -> None:
        self.error = error


def _abort_malformed(context: grpc.ServicerContext, method: str, error: Exception) -> None:
    message = f"request: the bytes are not a valid request message of {method} ({error})"
    log.debug("malformed request", extra={"fields": {"method": method, "peer": context.peer()}})
    context.abort_with_status(errors.rich_status(grpc.StatusCode.INVALID_ARGUMENT, message, "request"))


class MalformedRequestInterceptor(grpc.ServerInterceptor):
    """Answers undecodable request bytes with INVALID_ARGUMENT instead of INTERNAL."""

    def intercept_service(self, continuation, handler_call_details):
        handler = continuation(handler_call_details)
        if handler is None or handler.request_deserializer is None:
            return handler
        method = handler_call_details.method
        parse = handler.request_deserializer

        def deserialize(data: bytes):
            try:
                return parse(data)
            except Exception as exc:  # noqa: BLE001 - protobuf's DecodeError and kin
                return _Undecodable(exc)

        kw = dict(request_deserializer=deserialize, response_serializer=handler.response_serializer)
        if handler.request_streaming:
            behavior = handler.stream_stream or handler.stream_unary

            def checked(requests, context):
                for r in requests:
                    if isinstance(r, _Undecodable):
                        _abort_malformed(context, method, r.error)
                    yield r

            def streaming(request_iterator, context):
                return behavior(checked(request_iterator, context), context)

            factory = (grpc.stream_stream_rpc_method_handler if handler.response_streaming
                       else grpc.stream_unary_rpc_method_handler)
            return factory(streaming, **kw)
        behavior = handler.unary_stream or handler.unary_unary

        def unary(request, context):
            if isinstance(request, _Undecodable):
                _abort_malformed(context, method, request.error)
            return behavior(request, context)

        factory = (grpc.unary_stream_rpc_method_handler if handler.response_streaming
                   else grpc.unary_unary_rpc_method_handler)
        return factory(unary, **kw)
