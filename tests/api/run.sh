#!/usr/bin/env bash
# tests/api/run.sh — the api-spec checks: spec validity and lint, route drift
# against `swapspec routes`, and live responses of `swapspec serve` against the
# spec's schemas.  Installs the pinned npm packages (package-lock.json) on the
# first run.
#
# Usage: bash tests/api/run.sh path/to/swapspec
# Ends with one line "N passed, N failed" summed over the three scripts; the
# exit status is non-zero when any check failed.
set -uo pipefail
if [ $# -ne 1 ]; then
    echo "usage: $0 path/to/swapspec" >&2
    exit 2
fi
bin=$(realpath "$1") || exit 2
here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
cd "$here" || exit 2

if [ ! -d node_modules ]; then
    if ! npm ci --no-audit --no-fund --loglevel=error >/dev/null; then
        echo "npm ci failed (the npm registry must be reachable on the first run)" >&2
        echo "0 passed, 1 failed"
        exit 1
    fi
fi

log=$(mktemp)
trap 'rm -f "$log"' EXIT
status=0
run_step() {
    echo "== node $*"
    node "$@" | tee -a "$log"
    [ "${PIPESTATUS[0]}" -eq 0 ] || status=1
}
run_step check_spec.mjs
run_step routes_drift.mjs "$bin"
run_step validate_live.mjs "$bin"
read -r passed failed < <(awk '/^[0-9]+ passed, [0-9]+ failed/ { p += $1; f += $3 } END { print p + 0, f + 0 }' "$log")
# A script that crashed before its summary line still fails the run.
if [ "$status" -ne 0 ] && [ "${failed:-0}" -eq 0 ]; then failed=1; fi
echo "== api-spec checks, all scripts"
echo "${passed:-0} passed, ${failed:-0} failed"
exit "$status"
