#!/usr/bin/env bash
# Times `splitsmith estimate points --families pow3 --bootstrap 1000` (fit, backtest, 1000
# bootstrap refits, jackknife, on both cores) against the same fit and 1000 bootstrap refits
# with scipy.optimize.curve_fit (bench/points_scipy.py, method "lm", one core), in the same run, on the
# script-test points file (24 points at 6 sizes), and prints the ratio (scipy time /
# splitsmith time: higher is faster). Usage: bash bench/estimate_points.sh (needs python3-scipy)
set -euo pipefail
cd "$(dirname "$0")/.."
tmp=$(mktemp -d); trap 'rm -rf "$tmp"' EXIT
sed -n '/^-- wall_loss.csv --$/,/^-- single.csv --$/p' testdata/script/estimate_points_basic.txtar | sed '1d;$d' > "$tmp/points.csv"
go build -o "$tmp/splitsmith" ./cmd/splitsmith
echo "$(/usr/bin/python3 -c 'import scipy; print("scipy", scipy.__version__)'); $(go version | cut -d' ' -f3); $(nproc) cores"
best=999
for i in 1 2 3; do
  s=$(date +%s.%N)
  "$tmp/splitsmith" estimate points --points "$tmp/points.csv" --families pow3 --bootstrap 1000 --target 0.9 > /dev/null
  e=$(date +%s.%N)
  best=$(echo "t=$e - $s; if (t < $best) t else $best" | bc -l)
done
base=$(/usr/bin/python3 bench/points_scipy.py "$tmp/points.csv" 1000)
printf 'splitsmith %.3fs, scipy curve_fit %.3fs (best of 3 each), ratio (scipy/splitsmith) %.1f\n' "$best" "$base" "$(echo "$base / $best" | bc -l)"
