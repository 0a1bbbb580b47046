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

# Built before the server starts, so that the build does not compete with its warm-up.
cargo bench --quiet --bench load --no-run

"$BIN" --database-url "$URL" serve --no-demo --addr "$ADDR" >"$DIR/server.log" 2>&1 &
SERVER=$!
trap 'kill $SERVER 2>/dev/null || true' EXIT
for _ in $(seq 300); do curl -s -o /dev/null "http://$ADDR/login" && break; sleep 0.1; done
# The first portfolio answers after the start, while the figures warm up in the background.
for i in 1 2 3; do
  T=$(curl -s -o "$DIR/first.json" -w '%{time_total}' -H "authorization: Bearer $TOKEN" "http://$ADDR/api/v1/portfolio?budget=5000000")
  echo "portfolio API request $i after the start: $T s, zones_pending $(grep -o '"zones_pending":[0-9]*' "$DIR/first.json" | cut -d: -f2)"
done
for _ in $(seq 600); do grep -q "figures warmed up" "$DIR/server.log" && break; sleep 0.1; done
grep "figures warmed up" "$DIR/server.log" | sed 's/\x1b\[[0-9;]*m//g'
echo "server resident memory after the warm-up: $(grep VmRSS /proc/$SERVER/status | awk '{print $2, $3}')"

LOAD_BASE="http://$ADDR" LOAD_TOKEN="$TOKEN" LOAD_DB="$URL" LOAD_SECONDS="$SECONDS_" LOAD_CONNECTIONS="$CONNECTIONS" \
  cargo bench --quiet --bench load
echo "server peak resident memory: $(grep VmHWM /proc/$SERVER/status | awk '{print $2, $3}')"
echo "server still running: $(kill -0 $SERVER && echo yes)"
