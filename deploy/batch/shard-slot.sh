#!/usr/bin/env bash
# One slot of a batch job array runs one etchguard shard.
#
#   SHARD_SLOT=<0..N-1> SHARD_COUNT=N RUN_DIR=/shared/run1 deploy/batch/shard-slot.sh [serve options]
#
# SHARD_SLOT is the slot's index in the array (map the scheduler's array index to it on
# the submit line), SHARD_COUNT the array's size, RUN_DIR a folder every node sees (a
# shared file system). SHARD_HOST (default: this node's first address from
# `hostname -I`) and SHARD_PORT (default 50051) say where this shard listens.
#
# The job writes the topology itself: each slot puts its address in
# RUN_DIR/addresses/slot-K, waits until all N are there, and writes RUN_DIR/topology
# from them (every slot writes the same text, through a temporary file and a rename);
# routers read that file. Each shard keeps its journal in RUN_DIR/state/shard-K, so a
# slot that is run again (requeued) comes back with every change it acknowledged. The
# other arguments go to `etchguard serve` (--rules, TLS options for a farm network,
# --token-file, ...).
set -euo pipefail

: "${SHARD_SLOT:?set SHARD_SLOT to the array index (0..N-1)}"
: "${SHARD_COUNT:?set SHARD_COUNT to the number of slots}"
: "${RUN_DIR:?set RUN_DIR to a folder every node sees}"
ETCHGUARD=${ETCHGUARD:-etchguard}
PORT=${SHARD_PORT:-50051}
HOST=${SHARD_HOST:-$(hostname -I | awk '{print $1}')}
WAIT_S=${SHARD_WAIT_S:-600}

case "$SHARD_SLOT" in ''|*[!0-9]*) echo "shard-slot: SHARD_SLOT must be a whole number" >&2; exit 2;; esac
case "$SHARD_COUNT" in ''|*[!0-9]*) echo "shard-slot: SHARD_COUNT must be a whole number" >&2; exit 2;; esac
if [ "$SHARD_SLOT" -ge "$SHARD_COUNT" ]; then
    echo "shard-slot: SHARD_SLOT $SHARD_SLOT is not below SHARD_COUNT $SHARD_COUNT" >&2
    exit 2
fi

mkdir -p "$RUN_DIR/addresses" "$RUN_DIR/state"
printf '%s:%s\n' "$HOST" "$PORT" > "$RUN_DIR/addresses/.slot-$SHARD_SLOT.tmp"
mv "$RUN_DIR/addresses/.slot-$SHARD_SLOT.tmp" "$RUN_DIR/addresses/slot-$SHARD_SLOT"

deadline=$(( $(date +%s) + WAIT_S ))
while :; do
    present=0
    for ((k = 0; k < SHARD_COUNT; k++)); do
        [ -s "$RUN_DIR/addresses/slot-$k" ] && present=$((present + 1))
    done
    [ "$present" -eq "$SHARD_COUNT" ] && break
    if [ "$(date +%s)" -ge "$deadline" ]; then
        echo "shard-slot: only $present of $SHARD_COUNT slots wrote their address in ${WAIT_S}s" >&2
        exit 1
    fi
    sleep 1
done

tmp="$RUN_DIR/.topology.$SHARD_SLOT.tmp"
{
    echo "etchguard-topology 1"
    echo "shards $SHARD_COUNT"
    echo "directory-cell ${SHARD_DIRECTORY_CELL:-50000}"
    for ((k = 0; k < SHARD_COUNT; k++)); do
        echo "shard $k $(cat "$RUN_DIR/addresses/slot-$k")"
    done
} > "$tmp"
mv "$tmp" "$RUN_DIR/topology"

exec "$ETCHGUARD" serve --topology "$RUN_DIR/topology" --shard-index "$SHARD_SLOT" \
    --listen "$HOST:$PORT" --state-dir "$RUN_DIR/state/shard-$SHARD_SLOT" "$@"
