#!/usr/bin/env bash
# Builds the C++ example (build/cpp-example, reused between runs), starts
# `etchguard serve` on the demo deck on a loopback port the server picks, waits until
# it writes the address it listens on, runs the example against it and stops the
# server. Extra arguments go to the example after the address (e.g. a net name).
#   bash client_examples/cpp/run_example.sh            (make cpp-example does this)
set -euo pipefail
REPO="$(cd "$(dirname "$0")/../.." && pwd)"
BUILD="$REPO/build/cpp-example"
DECK="$REPO/service/etchguard/data/lumen-6m.toml"

cmake -S "$REPO/client_examples/cpp" -B "$BUILD" >/dev/null
cmake --build "$BUILD" -j "$(nproc)" >/dev/null

# The server picks its own port (127.0.0.1:0) and writes the address it bound to
# --address-file once it listens: no port chosen here that another process could take.
RUN_DIR="$(mktemp -d)"
ADDRESS_FILE="$RUN_DIR/address"
LOG="$RUN_DIR/log"
"$REPO/.venv/bin/etchguard" serve --rules "$DECK" --listen 127.0.0.1:0 --address-file "$ADDRESS_FILE" \
    --log-level warning 2>"$LOG" &
SERVER=$!
stop_server() {
    kill -TERM "$SERVER" 2>/dev/null || true
    wait "$SERVER" 2>/dev/null || true
    rm -rf "$RUN_DIR"
}
trap stop_server EXIT

for _ in $(seq 200); do  # up to 20 s
    [ -s "$ADDRESS_FILE" ] && break
    kill -0 "$SERVER" 2>/dev/null || break
    sleep 0.1
done
if [ ! -s "$ADDRESS_FILE" ]; then
    echo "run_example: etchguard serve did not start listening" >&2
    cat "$LOG" >&2
    exit 1
fi
ADDRESS="$(head -n 1 "$ADDRESS_FILE")"

"$BUILD/etchguard_example" "$ADDRESS" "$@"
