#!/usr/bin/env bash
# regen.sh regenerates the R reference values in testdata/reference/ with
# Rscript (Debian's r-base-core) and fails if they differ from the committed
# files in anything but the "r_version" line. CI runs it to prove that the
# golden values engine/rgolden_test.go checks against are still what R says.
#
# Usage: testdata/reference/regen.sh          (from anywhere in the repo)
set -euo pipefail
cd "$(dirname "$0")/../.."

if ! command -v Rscript >/dev/null 2>&1; then
	echo "regen.sh: Rscript not found; install Debian's r-base-core" >&2
	exit 1
fi

Rscript testdata/reference/gen_influence.R >/dev/null

status=0
# git diff -I drops hunks whose changed lines all match; its --exit-code
# does not honour -I in every git version, so test the output instead.
changed=$(git diff -I '^  "r_version": ' -- testdata/reference)
if [ -n "$changed" ]; then
	git diff --stat -- testdata/reference >&2
	echo "regen.sh: R now gives different reference values (see git diff testdata/reference)" >&2
	status=1
fi
new=$(git ls-files --others --exclude-standard -- testdata/reference)
if [ -n "$new" ]; then
	echo "regen.sh: the generator wrote files that are not committed:" >&2
	echo "$new" >&2
	status=1
fi
if [ "$status" -eq 0 ] && ! git diff --quiet -- testdata/reference; then
	echo "regen.sh: only the R version line changed ($(Rscript -e 'cat(R.version.string)')); values match"
	git checkout -- testdata/reference
elif [ "$status" -eq 0 ]; then
	echo "regen.sh: reference values unchanged"
fi
exit "$status"
