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

PLUMB_BENCH_CSV="$tmp/bench.csv" PLUMB_BENCH_ROWS="$rows" go test -count=1 -run "^TestWriteBenchCSV$" ./cmd/plumb >/dev/null
go build -o "$tmp/plumb" ./cmd/plumb
cat > "$tmp/job.R" <<'RSCRIPT'
args <- commandArgs(trailingOnly = TRUE)
d <- read.csv(args[1])
fit <- lm(reading ~ emf_mv + bath_c + rh_pct + pressure_kpa + I(emf_mv^2), data = d)
im <- influence.measures(fit)
write.csv(im$infmat, args[2])
RSCRIPT

run_r() { Rscript "$tmp/job.R" "$tmp/bench.csv" "$tmp/r_out.csv"; }
run_plumb() {
	"$tmp/plumb" inspect "$tmp/bench.csv" --response reading \
		--terms "emf_mv, bath_c, rh_pct, pressure_kpa, emf_mv^2" --format csv > "$tmp/plumb_out.csv"
}
# timed CMD: runs CMD and prints "wall cpu" in seconds (cpu = user + sys,
# which a busy machine inflates far less than wall time).
timed() {
	local TIMEFORMAT='%R %U %S' out
	out=$( { time "$@" 2>/dev/null; } 2>&1 )
	awk '{printf "%.4f %.4f\n", $1, $2 + $3}' <<<"$out"
}

# One untimed run of each to warm the page cache and check both work.
run_r
run_plumb
echo "input: $rows rows, $(wc -c < "$tmp/bench.csv") bytes; outputs: R $(wc -c < "$tmp/r_out.csv") bytes, plumb $(wc -c < "$tmp/plumb_out.csv") bytes"

r_times=()
p_times=()
ratios=()
r_cpu=()
p_cpu=()
cpu_ratios=()
for i in $(seq 1 "$runs"); do
	read -r r rc <<<"$(timed run_r)"
	read -r p pc <<<"$(timed run_plumb)"
	q=$(awk -v r="$r" -v p="$p" 'BEGIN {printf "%.3f", r / p}')
	qc=$(awk -v r="$rc" -v p="$pc" 'BEGIN {printf "%.3f", r / p}')
	r_times+=("$r"); p_times+=("$p"); ratios+=("$q")
	r_cpu+=("$rc"); p_cpu+=("$pc"); cpu_ratios+=("$qc")
	printf 'run %d: R %.3f s (cpu %.3f), plumb %.4f s (cpu %.4f), ratio %.1f (cpu %.1f)\n' "$i" "$r" "$rc" "$p" "$pc" "$q" "$qc"
done

median() { printf '%s\n' "$@" | sort -g | awk '{a[NR]=$1} END {if (NR%2) print a[(NR+1)/2]; else print (a[NR/2]+a[NR/2+1])/2}'; }
mr=$(median "${r_times[@]}")
mp=$(median "${p_times[@]}")
mq=$(median "${ratios[@]}")
printf 'median over %d runs: R %.3f s, plumb %.4f s, median ratio %.1fx (wall time)\n' "$runs" "$mr" "$mp" "$mq"
printf 'median cpu time:     R %.3f s, plumb %.4f s, median ratio %.1fx (user + sys)\n' \
	"$(median "${r_cpu[@]}")" "$(median "${p_cpu[@]}")" "$(median "${cpu_ratios[@]}")"
echo "load average: $(cut -d' ' -f1-3 /proc/loadavg 2>/dev/null || echo unknown)"
if awk -v q="$mq" 'BEGIN {exit !(q >= 10)}'; then
	echo "target met: plumb is at least 10x faster than R"
else
	echo "target missed: plumb is less than 10x faster than R" >&2
	exit 1
fi
