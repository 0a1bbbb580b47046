#!/usr/bin/env bash
# Load test on the scale data: builds the release binary, generates and loads the 1,000-zone
# scenario (once per size), starts the server, runs benches/load.rs against it, and prints the
# server's peak resident memory and how long the first portfolio answer took.
# Usage: [SCALE_ZONES=10000] benches/load.sh [seconds] [connections]
set -euo pipefail
cd "$(dirname "$0")/.."
SECONDS_=${1:-60}
CONNECTIONS=${2:-32}
ZONES=${SCALE_ZONES:-1000}
TARGET=${CARGO_TARGET_DIR:-target}
DIR=$TARGET/scale
DB=$DIR/scale-$ZONES.db
URL="sqlite://$DB"
BIN=$TARGET/release/pilot-ledger
ADDR=127.0.0.1:8099

cargo build --release --quiet
mkdir -p "$DIR"
if [ ! -f "$DB" ]; then
  python3 benches/scale_scenario.py "$DIR/scale-$ZONES.json" "$ZONES"
  /usr/bin/time -f "load: %e s wall, %M KiB peak memory" "$BIN" --database-url "$URL" load "$DIR/scale-$ZONES.json"
  rm "$DIR/scale-$ZONES.json"
fi
"$BIN" --database-url "$URL" user add load-controller --role controller >/dev/null 2>&1 <<<"load test password 1" || true
TOKEN=$("$BIN" --database-url "$URL" token create load-controller --label load)

"$BIN" --database-url "$URL" serve --no-demo --addr "$ADDR" >"$DIR/server.log" 2>&1 &
SERVER=$!
trap 'kill $SERVER 2>/dev/null || true' EXIT
for _ in $(seq 100); do curl -s -o /dev/null "http://$ADDR/login" && break; sleep 0.1; done

LOAD_BASE="http://$ADDR" LOAD_TOKEN="$TOKEN" LOAD_DB="$URL" LOAD_SECONDS="$SECONDS_" LOAD_CONNECTIONS="$CONNECTIONS" \
  cargo bench --quiet --bench load
echo "server peak resident memory: $(grep VmHWM /proc/$SERVER/status | awk '{print $2, $3}')"
echo "server still running: $(kill -0 $SERVER && echo yes)"
