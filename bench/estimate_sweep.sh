#!/usr/bin/env bash
# Times the ridge capacity sweep (degrees 1-5 x 8 sizes x 5 repeats, 100,000 training rows with
# 3 features, 25,000 holdout rows, both cores) in splitsmith (go test -bench) and in
# scikit-learn (bench/sweep_sklearn.py: learning_curve over PolynomialFeatures + StandardScaler
# + Ridge, one call per degree, n_jobs=2) in the same run, and prints the ratio
# (scikit-learn time / splitsmith time: higher is faster).
# Usage: bash bench/estimate_sweep.sh   (needs Debian python3-sklearn)
set -euo pipefail
cd "$(dirname "$0")/.."
# The sizes MeasureCurves chooses automatically, AutoSizes(100000, 56 terms, 8) (asserted by
# estimate's TestAutoSizes).
SIZES=112,296,780,2060,5437,14352,37884,100000
echo "sizes: $SIZES; $(/usr/bin/python3 -c 'import sklearn, numpy; print("scikit-learn", sklearn.__version__, "numpy", numpy.__version__)'); $(go version | cut -d' ' -f3); $(nproc) cores"
ours=$(go test ./estimate/ -run '^$' -bench 'Sweep_5Degrees8Sizes5Repeats100k' -benchtime 3x -count 1 |
  awk '/^BenchmarkSweep/ {printf "%.3f", $3/1e9}')
base=$(/usr/bin/python3 bench/sweep_sklearn.py "$SIZES")
printf 'splitsmith %.2fs (mean of 3), scikit-learn %.2fs (best of 3), ratio (scikit-learn/splitsmith) %.2f\n' \
  "$ours" "$base" "$(echo "$base / $ours" | bc -l)"
