#!/usr/bin/env bash
# Times `splitsmith ingest` against the sqlite3 CLI's `.import` of the same 1M-row CSV into a
# pre-created typed table, in one run, and prints the ratio (sqlite3 time / splitsmith time:
# 1.0 = parity, higher is faster) and splitsmith's peak RSS.
# Usage: bash bench/ingest.sh [ROWS]   (needs sqlite3 and GNU time: apt-get install sqlite3 time)
set -euo pipefail
ROWS=${1:-1000000}
cd "$(dirname "$0")/.."
W=$(mktemp -d)
trap 'rm -rf "$W"' EXIT
go build -o "$W/splitsmith" ./cmd/splitsmith
go run ./bench/gencsv -rows "$ROWS" > "$W/data.csv"
echo "input: $ROWS rows, $(du -m "$W/data.csv" | cut -f1) MB; sqlite3 $(sqlite3 --version | cut -d' ' -f1)"
cat "$W/data.csv" > /dev/null # warm the page cache for both

secs() { local t0 t1; t0=$(date +%s.%N); "$@" > /dev/null; t1=$(date +%s.%N); echo "$t1 - $t0" | bc -l; }

base() {
  rm -f "$W/base.db"
  sqlite3 "$W/base.db" <<SQL
CREATE TABLE t(inspection_id INTEGER, segment_id INTEGER, inspected_at TEXT, pressure_kpa REAL,
  soil_moisture REAL, wall_loss_pct REAL, material TEXT, crew TEXT, note TEXT, repaired INTEGER);
.mode csv
.import --skip 1 $W/data.csv t
SQL
}
ours() {
  rm -f "$W/ours.db"
  /usr/bin/time -f "%M" -o "$W/rss" "$W/splitsmith" ingest --db "$W/ours.db" --table t "$W/data.csv"
}

best_base=999999; best_ours=999999
for i in 1 2 3; do
  b=$(secs base); o=$(secs ours)
  echo "run $i: sqlite3 .import ${b}s, splitsmith ingest ${o}s, peak RSS $(( $(cat "$W/rss") / 1024 )) MiB"
  best_base=$(echo "if ($b < $best_base) $b else $best_base" | bc -l)
  best_ours=$(echo "if ($o < $best_ours) $o else $best_ours" | bc -l)
done
n_base=$(sqlite3 "$W/base.db" 'SELECT count(*) FROM t'); n_ours=$(sqlite3 "$W/ours.db" 'SELECT count(*) FROM t')
[ "$n_base" = "$n_ours" ] || { echo "row counts differ: $n_base vs $n_ours" >&2; exit 1; }
printf 'best of 3: sqlite3 %.2fs, splitsmith %.2fs, ratio (sqlite3/splitsmith) %.2f\n' "$best_base" "$best_ours" "$(echo "$best_base / $best_ours" | bc -l)"
