#!/usr/bin/env bash
# compare_revs.sh measures one benchmark of one package at two git
# revisions side by side, in one run: it builds each revision's test
# binary, runs them alternately RUNS times (one benchmark run each in
# turn, so that the machine's drift hits both alike), and prints each
# side's median and range and the median of the per-pair ratios
# (new/old). On a noisy machine the paired ratio is the figure to quote.
#
# Usage: testdata/bench/compare_revs.sh OLD_REV NEW_REV PKG BENCH [RUNS]
#   e.g. testdata/bench/compare_revs.sh 8588525 HEAD ./engine 'Influence/n=1000000/p=6' 10
# NEW_REV may be "." for the working tree.
set -euo pipefail
cd "$(dirname "$0")/../.."

old=${1:?old revision}
new=${2:?new revision}
pkg=${3:?package}
bench=${4:?benchmark regexp}
runs=${5:-8}

tmp=$(mktemp -d)
trap 'git worktree remove --force "$tmp/old" >/dev/null 2>&1 || true; git worktree remove --force "$tmp/new" >/dev/null 2>&1 || true; rm -rf "$tmp"' EXIT

build() { # build REV NAME
	local src=.
	if [ "$1" != "." ]; then
		git worktree add --detach -q "$tmp/$2" "$1"
		src="$tmp/$2"
	fi
	(cd "$src" && go test -c -o "$tmp/$2.test" "$pkg")
	# Benchmarks run in the package directory (testdata paths).
	(cd "$src/$pkg" && pwd) > "$tmp/$2.dir"
}
build "$old" old
build "$new" new

for k in $(seq "$runs"); do
	for side in old new; do
		(cd "$(cat "$tmp/$side.dir")" && "$tmp/$side.test" -test.run '^$' -test.bench "$bench" -test.count 1) |
			awk -v s="$side" -v k="$k" '/^Benchmark/ {print s, k, $1, $3/1e6}'
	done
done > "$tmp/runs.txt"

# median FILE: the median of the numbers in FILE, one a line.
median() {
	sort -g "$1" | awk '{a[NR] = $1} END {print (NR % 2) ? a[(NR+1)/2] : (a[NR/2] + a[NR/2+1]) / 2}'
}
for name in $(awk '{print $3}' "$tmp/runs.txt" | sort -u); do
	for side in old new; do
		awk -v s="$side" -v n="$name" '$1 == s && $3 == n {print $4}' "$tmp/runs.txt" > "$tmp/v"
		printf '%s %s: median %.2f ms (range %.2f-%.2f, %d runs)\n' "$name" "$side" \
			"$(median "$tmp/v")" "$(sort -g "$tmp/v" | head -1)" "$(sort -g "$tmp/v" | tail -1)" "$(wc -l < "$tmp/v")"
	done
	awk -v n="$name" '$3 == n {v[$1" "$2] = $4; if ($2 > k) k = $2}
		END {for (i = 1; i <= k; i++) if (("old "i) in v && ("new "i) in v) print v["new "i] / v["old "i]}' \
		"$tmp/runs.txt" > "$tmp/r"
	printf '%s: median paired ratio new/old %.3f over %d pairs\n' "$name" "$(median "$tmp/r")" "$(wc -l < "$tmp/r")"
done
