#!/usr/bin/env bash
# Times `splitsmith profile` on a generated 1M-row table against a baseline in the same run:
# the stock sqlite3 CLI computing, per column, only count, count(DISTINCT), min, max and avg
# (what a hand-written SQL summary gives; no quantiles, outliers, conformity or duplicates).
# Prints both times, the ratio (splitsmith / sqlite3: lower is better) and splitsmith's peak RSS.
# Usage: bash bench/profile.sh [ROWS]   (needs sqlite3 and GNU time: apt-get install sqlite3 time)
set -euo pipefail
ROWS=${1:-1000000}
cd "$(dirname "$0")/.."
W=$(mktemp -d)
trap 'rm -rf "$W"' EXIT
go build -o "$W/splitsmith" ./cmd/splitsmith
go run ./bench/gencsv -rows "$ROWS" > "$W/data.csv"
"$W/splitsmith" ingest --db "$W/t.db" --table t "$W/data.csv" > /dev/null
cols=$(sqlite3 "$W/t.db" "SELECT group_concat(name, ' ') FROM (SELECT name FROM ss_columns WHERE table_name = 't' ORDER BY position)")
q=""
for c in $cols; do q="$q SELECT count(\"$c\"), count(DISTINCT \"$c\"), min(\"$c\"), max(\"$c\"), avg(\"$c\") FROM t;"; done
echo "table: $ROWS rows, $(echo $cols | wc -w) columns; sqlite3 $(sqlite3 --version | cut -d' ' -f1)"

secs() { local t0 t1; t0=$(date +%s.%N); "$@" > /dev/null; t1=$(date +%s.%N); echo "$t1 - $t0" | bc -l; }
base() { sqlite3 "$W/t.db" "$q"; }
ours() { /usr/bin/time -f "%M" -o "$W/rss" "$W/splitsmith" profile --db "$W/t.db" --table t; }

best_base=999999; best_ours=999999
for i in 1 2 3; do
  b=$(secs base); o=$(secs ours)
  echo "run $i: sqlite3 summary ${b}s, splitsmith profile ${o}s, peak RSS $(( $(cat "$W/rss") / 1024 )) MiB"
  best_base=$(echo "if ($b < $best_base) $b else $best_base" | bc -l)
  best_ours=$(echo "if ($o < $best_ours) $o else $best_ours" | bc -l)
done
printf 'best of 3: sqlite3 summary %.2fs, splitsmith profile %.2fs, ratio (splitsmith/sqlite3) %.2f\n' "$best_base" "$best_ours" "$(echo "$best_ours / $best_base" | bc -l)"
