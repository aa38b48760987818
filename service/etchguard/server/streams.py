"""Long-lived streams must not starve the server: a cap and an idle timeout.

In grpc's Python server every open call holds one worker thread for its whole life,
including a bidirectional stream (``Session``, reflection) that sits waiting for the
client's next request. So ``StreamGate`` (a server interceptor):

* admits at most ``max_streams`` bidirectional streams at once, fewer than the
  workers, so that unary calls and the health checks always find a thread; one
  beyond is refused RESOURCE_EXHAUSTED before it takes anything;
* closes a stream that has waited ``idle_s`` seconds for its client's next request
  (UNAVAILABLE with a message saying so: reconnecting is the remedy), logged
  ``idle stream closed`` with method and peer. Time spent answering is not idle time.

One watchdog thread looks at the waiting streams a few times per ``idle_s``; a stream
costs a dict entry per request it waits for. Connections with no call at all are
grpc's to close (``grpc.max_connection_idle_ms``, set in ``app``).
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Iterator

import grpc

log = logging.getLogger("etchguard.server")


def _close_with_status(context: grpc.ServicerContext, message: str) -> None:
    """End a call from another thread than its handler's. grpc's public ``cancel()``
    can only say CANCELLED; the call object underneath takes a code and a message,
    so use it where it is there (and the plain cancel where it is not)."""
    call = getattr(getattr(context, "_rpc_event", None), "call", None)
    try:
        from grpc._cython import cygrpc

        call.cancel(cygrpc.StatusCode.unavailable, message)  # type: ignore[union-attr]
    except Exception:  # noqa: BLE001 - another grpc inside: fall back to the public way
        context.cancel()


class StreamGate(grpc.ServerInterceptor):
    """Caps the open bidirectional streams and closes idle ones (module docstring)."""

    def __init__(self, max_streams: int, idle_s: float) -> None:
        self.max_streams = max_streams
        self.idle_s = idle_s
        self._open = 0
        self._lock = threading.Lock()
        # stream key -> (monotonic time it started waiting for a request, method, context)
        self._waiting: dict[int, tuple[float, str, grpc.ServicerContext]] = {}
        self._stop = threading.Event()
        self._watchdog: threading.Thread | None = None

    # -- admission ------------------------------------------------------------------

    def _admit(self) -> bool:
        with self._lock:
            if self._open >= self.max_streams:
                return False
            self._open += 1
            if self._watchdog is None:
                self._watchdog = threading.Thread(target=self._watch, name="etchguard-stream-idle",
                                                  daemon=True)
                self._watchdog.start()
            return True

    def _release(self) -> None:
        with self._lock:
            self._open -= 1

    def intercept_service(self, continuation, handler_call_details):
        handler = continuation(handler_call_details)
        if handler is None or not (handler.request_streaming and handler.response_streaming):
            return handler
        method = handler_call_details.method
        behavior = handler.stream_stream

        def gated(request_iterator, context):
            if not self._admit():
                log.warning("stream refused: all stream slots taken", extra={"fields": {
                    "method": method, "peer": context.peer(), "max_streams": self.max_streams}})
                context.abort(grpc.StatusCode.RESOURCE_EXHAUSTED,
                              f"{self.max_streams} streams are open, this server's limit "
                              "(--max-sessions); close one or retry later")
            released = threading.Lock()

            def release() -> None:  # once, at the first of the handler's end and the call's end
                if released.acquire(blocking=False):
                    self._release()

            context.add_callback(release)
            try:
                yield from behavior(self._watched(request_iterator, context, method), context)
            finally:
                release()

        return grpc.stream_stream_rpc_method_handler(
            gated, request_deserializer=handler.request_deserializer,
            response_serializer=handler.response_serializer)

    # -- idle streams ---------------------------------------------------------------

    def _watched(self, requests: Iterator, context: grpc.ServicerContext, method: str) -> Iterator:
        """The requests, with the time each one is waited for on record."""
        key = id(context)
        waiting = self._waiting
        try:
            while True:
                with self._lock:
                    waiting[key] = (time.monotonic(), method, context)
                try:
                    request = next(requests)
                except StopIteration:
                    return
                finally:
                    with self._lock:
                        waiting.pop(key, None)
                yield request
        finally:
            with self._lock:
                waiting.pop(key, None)

    def _watch(self) -> None:
        period = min(1.0, self.idle_s / 4)
        while not self._stop.wait(period):
            now = time.monotonic()
            with self._lock:
                idle = [(key, since, method, context) for key, (since, method, context)
                        in self._waiting.items() if now - since > self.idle_s]
                for key, *_ in idle:
                    del self._waiting[key]
            for _, since, method, context in idle:
                log.info("idle stream closed", extra={"fields": {
                    "method": method, "peer": context.peer(), "idle_s": round(now - since, 1)}})
                _close_with_status(context, f"the stream waited more than {self.idle_s:g} s for "
                                   "a request and was closed (--session-idle-s); open a new one")

    def close(self) -> None:
        self._stop.set()
