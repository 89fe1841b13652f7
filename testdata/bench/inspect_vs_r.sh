#!/usr/bin/env bash
# inspect_vs_r.sh times `plumb inspect` against R doing the same job on a
# seeded 100,000-row, 6-coefficient CSV: read the file, fit by least
# squares, compute every row's influence measures, write them as CSV.
#
#   R side:     Rscript: read.csv, lm, influence.measures, write.csv
#   plumb side: plumb inspect FILE --response reading
#               --terms "emf_mv, bath_c, rh_pct, pressure_kpa, emf_mv^2"
#               --format csv > out.csv
#
# Both run alternately RUNS times (default 7, at least 5); the script prints
# each side's median wall time and the median of the per-pair ratios.
# Everything is made in a temporary directory and removed afterwards.
#
# Usage: testdata/bench/inspect_vs_r.sh [RUNS] [ROWS]
set -euo pipefail
cd "$(dirname "$0")/../.."

runs=${1:-7}
rows=${2:-100000}
if [ "$runs" -lt 5 ]; then
	echo "inspect_vs_r.sh: RUNS must be at least 5" >&2
	exit 2
fi
command -v Rscript >/dev/null 2>&1 || { echo "inspect_vs_r.sh: Rscript not found (Debian's r-base-core)" >&2; exit 1; }

tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

go run testdata/bench/gen_bench_csv.go -rows "$rows" -seed 1 > "$tmp/bench.csv"
go build -o "$tmp/plumb" ./cmd/plumb
cat > "$tmp/job.R" <<'RSCRIPT'
args <- commandArgs(trailingOnly = TRUE)
d <- read.csv(args[1])
fit <- lm(reading ~ emf_mv + bath_c + rh_pct + pressure_kpa + I(emf_mv^2), data = d)
im <- influence.measures(fit)
write.csv(im$infmat, args[2])
RSCRIPT

now() { date +%s.%N; }
run_r() { Rscript "$tmp/job.R" "$tmp/bench.csv" "$tmp/r_out.csv"; }
run_plumb() {
	"$tmp/plumb" inspect "$tmp/bench.csv" --response reading \
		--terms "emf_mv, bath_c, rh_pct, pressure_kpa, emf_mv^2" --format csv > "$tmp/plumb_out.csv"
}

# One untimed run of each to warm the page cache and check both work.
run_r
run_plumb
echo "input: $rows rows, $(wc -c < "$tmp/bench.csv") bytes; outputs: R $(wc -c < "$tmp/r_out.csv") bytes, plumb $(wc -c < "$tmp/plumb_out.csv") bytes"

r_times=()
p_times=()
ratios=()
for i in $(seq 1 "$runs"); do
	t0=$(now); run_r; t1=$(now)
	t2=$(now); run_plumb; t3=$(now)
	r=$(awk -v a="$t0" -v b="$t1" 'BEGIN {printf "%.6f", b - a}')
	p=$(awk -v a="$t2" -v b="$t3" 'BEGIN {printf "%.6f", b - a}')
	q=$(awk -v r="$r" -v p="$p" 'BEGIN {printf "%.3f", r / p}')
	r_times+=("$r")
	p_times+=("$p")
	ratios+=("$q")
	printf 'run %d: R %.3f s, plumb %.4f s, ratio %.1f\n' "$i" "$r" "$p" "$q"
done

median() { printf '%s\n' "$@" | sort -g | awk '{a[NR]=$1} END {if (NR%2) print a[(NR+1)/2]; else print (a[NR/2]+a[NR/2+1])/2}'; }
mr=$(median "${r_times[@]}")
mp=$(median "${p_times[@]}")
mq=$(median "${ratios[@]}")
printf 'median over %d runs: R %.3f s, plumb %.4f s, median ratio %.1fx\n' "$runs" "$mr" "$mp" "$mq"
if awk -v q="$mq" 'BEGIN {exit !(q >= 10)}'; then
	echo "target met: plumb is at least 10x faster than R"
else
	echo "target missed: plumb is less than 10x faster than R" >&2
	exit 1
fi
