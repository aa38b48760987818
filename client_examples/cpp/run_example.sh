#!/usr/bin/env bash
# Builds the C++ example (build/cpp-example, reused between runs), starts
# `etchguard serve` on the demo deck on a free loopback port, waits until it reports
# SERVING on the standard health service, runs the example against it and stops the
# server. Extra arguments go to the example after the address (e.g. a net name).
#   bash client_examples/cpp/run_example.sh            (make cpp-example does this)
set -euo pipefail
REPO="$(cd "$(dirname "$0")/../.." && pwd)"
PY="${PYTHON:-$REPO/.venv/bin/python}"
BUILD="$REPO/build/cpp-example"
DECK="$REPO/service/etchguard/data/lumen-6m.toml"

cmake -S "$REPO/client_examples/cpp" -B "$BUILD" >/dev/null
cmake --build "$BUILD" -j "$(nproc)" >/dev/null

PORT="$("$PY" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')"
ADDRESS="127.0.0.1:$PORT"
LOG="$(mktemp)"
"$REPO/.venv/bin/etchguard" serve --rules "$DECK" --listen "$ADDRESS" --log-level warning 2>"$LOG" &
SERVER=$!
stop_server() {
    kill -TERM "$SERVER" 2>/dev/null || true
    wait "$SERVER" 2>/dev/null || true
    rm -f "$LOG"
}
trap stop_server EXIT

# Health: the standard grpc.health.v1 check, polled for up to 20 s.
if ! "$PY" - "$ADDRESS" <<'PYEOF'
import sys, time
import grpc
from grpc_health.v1 import health_pb2, health_pb2_grpc
deadline = time.monotonic() + 20.0
with grpc.insecure_channel(sys.argv[1]) as channel:
    stub = health_pb2_grpc.HealthStub(channel)
    while time.monotonic() < deadline:
        try:
            if stub.Check(health_pb2.HealthCheckRequest(), timeout=1.0).status == health_pb2.HealthCheckResponse.SERVING:
                sys.exit(0)
        except grpc.RpcError:
            pass
        time.sleep(0.1)
sys.exit(1)
PYEOF
then
    echo "run_example: etchguard serve did not become healthy on $ADDRESS" >&2
    cat "$LOG" >&2
    exit 1
fi

"$BUILD/etchguard_example" "$ADDRESS" "$@"
