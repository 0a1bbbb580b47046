#!/usr/bin/env bash
# CSV import at scale: a fresh database with the demo plant, one file of N rows (default
# 100,000) for PRESS-2 posted to the import form's route, timed by curl; then the entries are
# counted (the form route takes a one-time token in its URL: any fresh value). Usage: benches/import.sh [rows]
set -euo pipefail
cd "$(dirname "$0")/.."
ROWS=${1:-100000}
DIR=target/import
DB="$DIR/import.db"
BIN=target/release/pilot-ledger
ADDR=127.0.0.1:8097

cargo build --release --quiet
rm -rf "$DIR" && mkdir -p "$DIR"
"$BIN" --database-url "sqlite://$DB" serve --addr "$ADDR" >"$DIR/server.log" 2>&1 &
SERVER=$!
trap 'kill $SERVER 2>/dev/null || true' EXIT
for _ in $(seq 100); do curl -s -o /dev/null "http://$ADDR/login" && break; sleep 0.1; done
"$BIN" --database-url "sqlite://$DB" user add import-controller --role controller >/dev/null <<<"import test password 1"
TOKEN=$("$BIN" --database-url "sqlite://$DB" token create import-controller --label import | tail -1)

python3 - "$DIR/rows.csv" "$ROWS" <<'PY'
import sys
path, rows = sys.argv[1], int(sys.argv[2])
with open(path, "w") as f:
    f.write("period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence\n")
    for i in range(rows):
        f.write(f"2026-{1 + i % 9:02},saving,Split and wrinkled blanks,direct,{1 + i % 40},,,,,shift report {i}\n")
PY
ZONE=$(python3 -c "import sqlite3,sys; print(sqlite3.connect(sys.argv[1]).execute(\"SELECT id FROM zones WHERE code = 'PRESS-2'\").fetchone()[0])" "$DB")
BEFORE=$(python3 -c "import sqlite3,sys; print(sqlite3.connect(sys.argv[1]).execute('SELECT COUNT(*) FROM ledger_entries').fetchone()[0])" "$DB")
echo "file: $(du -h "$DIR/rows.csv" | cut -f1), $ROWS rows"
curl -s -o /dev/null -w "import: HTTP %{http_code} in %{time_total} s\n" -H "authorization: Bearer $TOKEN" \
  -F "file=@$DIR/rows.csv;type=text/csv" "http://$ADDR/zones/$ZONE/ledger/import?form=bench-$$"
AFTER=$(python3 -c "import sqlite3,sys; print(sqlite3.connect(sys.argv[1]).execute('SELECT COUNT(*) FROM ledger_entries').fetchone()[0])" "$DB")
echo "entries added: $((AFTER - BEFORE))"
echo "server peak resident memory: $(grep VmHWM /proc/$SERVER/status | awk '{print $2, $3}')"
