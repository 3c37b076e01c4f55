#!/usr/bin/env bash
# Times `splitsmith ingest` against the sqlite3 CLI's `.import` of the same 1M-row CSV into a
# pre-created typed table, in one run, and prints the ratio (sqlite3 time / splitsmith time:
# 1.0 = parity, higher is faster), each side's CPU time (splitsmith parses in one goroutine
# while SQLite inserts in another, so its CPU time exceeds its wall time) and splitsmith's
# peak RSS.
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

# timed CMD...: runs CMD under GNU time; prints "wall cpu rss_kib" (cpu = user + sys).
timed() {
  /usr/bin/time -f "%e %U %S %M" -o "$W/time" "$@" > /dev/null
  awk '{ printf "%s %.2f %s\n", $1, $2 + $3, $4 }' "$W/time"
}

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
  # a relative input path, as users give it: ss_source stores it in every row
  (cd "$W" && ./splitsmith ingest --db ours.db --table t data.csv)
}
export -f base ours
export W

RUNS=${RUNS:-5}
best_base=999999; best_ours=999999; ratios=()
for i in $(seq "$RUNS"); do
  read -r bw bc _ < <(timed bash -c base)
  read -r ow oc orss < <(timed bash -c ours)
  r=$(echo "scale=2; $bw / $ow" | bc -l); ratios+=("$r")
  echo "run $i: sqlite3 .import ${bw}s (cpu ${bc}s), splitsmith ingest ${ow}s (cpu ${oc}s, peak RSS $(( orss / 1024 )) MiB), ratio $r"
  best_base=$(echo "if ($bw < $best_base) $bw else $best_base" | bc -l)
  best_ours=$(echo "if ($ow < $best_ours) $ow else $best_ours" | bc -l)
done
n_base=$(sqlite3 "$W/base.db" 'SELECT count(*) FROM t'); n_ours=$(sqlite3 "$W/ours.db" 'SELECT count(*) FROM t')
[ "$n_base" = "$n_ours" ] || { echo "row counts differ: $n_base vs $n_ours" >&2; exit 1; }
median=$(printf '%s\n' "${ratios[@]}" | sort -n | awk '{a[NR]=$1} END {print (NR%2 ? a[(NR+1)/2] : (a[NR/2]+a[NR/2+1])/2)}')
printf 'best of %d: sqlite3 %.2fs, splitsmith %.2fs, ratio %.2f; median of the per-run ratios %.2f (sqlite3/splitsmith; 1.0 = parity, floor 0.8)\n' "$RUNS" "$best_base" "$best_ours" "$(echo "$best_base / $best_ours" | bc -l)" "$median"
echo "load average: $(cut -d' ' -f1-3 /proc/loadavg) (the machine's other work slows both; compare within a run)"
