#!/usr/bin/env bash
# Times strayleaf's masked NMF against scikit-learn's unmasked NMF on one matrix, in one run, and
# prints the ratio. From the repository root:
#
#     bash testdata/golden/nmf/bench_side_by_side.sh
#
# The matrix (3,000 readings x 600 witnesses, k = 12, 10% of cells in lacunae) is written by
# bench_side_by_side.py, which also times scikit-learn; the Go side is BenchmarkFactorize600x3000k12
# reading the same files. Each side reports its best of five. OPENBLAS_CORETYPE and
# OPENBLAS_L2_SIZE, if set, are unset for the Python run alone (they slow a current numpy).
set -euo pipefail
cd "$(dirname "$0")/../../.."
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT

sk=$(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE /usr/bin/python3 testdata/golden/nmf/bench_side_by_side.py "$dir")
echo "$sk" | grep -v '^sklearn_seconds'
sk_s=$(echo "$sk" | awk '/^sklearn_seconds/ {print $2}')

go_out=$(NMF_BENCH_X="$dir/X.bin" NMF_BENCH_M="$dir/M.bin" \
  go test -run '^$' -bench '^BenchmarkFactorize600x3000k12$' -benchtime 1x -count 5 ./placement/nmf/)
echo "$go_out" | grep '^Benchmark'
go_s=$(echo "$go_out" | awk '/^Benchmark/ {print $3/1e9}' | sort -g | head -1)

echo "strayleaf (masked, GOMAXPROCS=$(nproc)): best ${go_s} s"
echo "scikit-learn (unmasked):            best ${sk_s} s"
awk -v g="$go_s" -v s="$sk_s" 'BEGIN {printf "ratio strayleaf / scikit-learn = %.2f\n", g / s}'
