#!/usr/bin/env bash
# Runs every Go fuzz test of the module for a short time each (FUZZTIME,
# default 3s); "FUZZTIME=5m bash scripts/fuzz.sh" runs them longer by hand.
# The seed corpora also run as ordinary tests in "go test ./...".
set -euo pipefail
fuzztime=${FUZZTIME:-3s}
go=${GO:-go}
count=0
while IFS=: read -r file name; do
	file=${file#./}
	pkg=./$(dirname "$file")
	echo "fuzz $pkg $name ($fuzztime)"
	if ! log=$("$go" test -run '^$' -fuzz "^${name}\$" -fuzztime "$fuzztime" "$pkg" 2>&1); then
		printf '%s\n' "$log" | tail -n 30 >&2
		echo "fuzz: $count passed, 1 failed" >&2
		exit 1
	fi
	count=$((count + 1))
done < <(grep -rHo --include='*_test.go' '^func Fuzz[A-Za-z0-9_]*' . | sed 's/func //' | sort)
echo "fuzz: $count passed, 0 failed"
