#!/usr/bin/env bash
# Runs every Go fuzz test of the module briefly (FUZZTIME, default 3000
# generated inputs each: a count, not a duration, so that a loaded machine
# does not end a run mid-input); "FUZZTIME=5m bash scripts/fuzz.sh" runs them
# longer by hand. The seed corpora also run as ordinary tests in
# "go test ./...". A run that Go's fuzzer stops with "context deadline
# exceeded" (its own shutdown racing a slow input, not a finding) is retried
# once; a real finding is written to testdata/fuzz/ and fails.
set -euo pipefail
fuzztime=${FUZZTIME:-3000x}
go=${GO:-go}
count=0
while IFS=: read -r file name; do
	file=${file#./}
	pkg=./$(dirname "$file")
	echo "fuzz $pkg $name ($fuzztime)"
	run() { "$go" test -run '^$' -fuzz "^${name}\$" -fuzztime "$fuzztime" "$pkg" 2>&1; }
	if ! log=$(run) && ! { grep -q "context deadline exceeded" <<<"$log" && log=$(run); }; then
		printf '%s\n' "$log" | tail -n 30 >&2
		echo "fuzz: $count passed, 1 failed" >&2
		exit 1
	fi
	count=$((count + 1))
done < <(grep -rHo --include='*_test.go' '^func Fuzz[A-Za-z0-9_]*' . | sed 's/func //' | sort)
echo "fuzz: $count passed, 0 failed"
