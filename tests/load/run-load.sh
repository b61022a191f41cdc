#!/usr/bin/env bash
# tests/load/run-load.sh — the service's load figures (not part of CI: it
# needs the machine to itself for a minute).
#
# Starts `swapspec serve` on a free loopback port with a fresh store, then
# runs wrk (Debian package `wrk`; installed here when missing, as root) at
# 64 connections: GET /healthz for the baseline, then POST /v1/analyses
# (moments, three summary runs; every request stores a record through group
# commit with synchronous=FULL), and prints requests/s, p50, p99, errors,
# the analyses/healthz ratio and the daemon's resident memory afterwards.
#
# wrk measures latency per request it sends; when the server falls behind,
# the requests it did not get to send are not counted (coordinated
# omission), so the tails printed here understate the tail a client with a
# fixed schedule would see.
#
# Usage: bash tests/load/run-load.sh [path/to/swapspec] [seconds] [connections]
set -euo pipefail
here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
bin=$(realpath "${1:-$here/../../build/swapspec}")
secs=${2:-20}
conns=${3:-64}
if ! command -v wrk >/dev/null; then
    DEBIAN_FRONTEND=noninteractive apt-get install -y -q wrk >/dev/null
fi
dir=$(mktemp -d)
trap 'kill -TERM "$pid" 2>/dev/null || true; wait "$pid" 2>/dev/null || true; rm -rf "$dir"' EXIT
"$bin" serve --listen 127.0.0.1:0 --data "$dir/load.db" 2>"$dir/log" &
pid=$!
for _ in $(seq 1 100); do
    port=$(grep -o '"port":[0-9]*' "$dir/log" | head -1 | cut -d: -f2 || true)
    [ -n "$port" ] && break
    sleep 0.1
done
url="http://127.0.0.1:$port"
summary() { grep '^wrk-summary' | sed 's/^wrk-summary //'; }
echo "daemon pid $pid on $url, store $dir/load.db, ${secs}s at $conns connections"
health=$(wrk -t2 -c"$conns" -d"${secs}s" --latency -s "$here/load.lua" "$url/healthz" | summary)
echo "GET  /healthz     $health"
analyses=$(wrk -t2 -c"$conns" -d"${secs}s" --latency -s "$here/load.lua" "$url/v1/analyses" -- analyses | summary)
echo "POST /v1/analyses $analyses"
rss=$(awk '/VmRSS/ {print $2}' "/proc/$pid/status")
hr=$(echo "$health" | sed 's/.*rate=\([0-9.]*\).*/\1/')
ar=$(echo "$analyses" | sed 's/.*rate=\([0-9.]*\).*/\1/')
stored=$(curl -s "$url/metrics" | awk '/^swapspec_analyses_stored/ {print $2}')
echo "analyses/healthz rate ratio: $(awk -v a="$ar" -v h="$hr" 'BEGIN {printf "%.3f", a / h}')"
echo "analyses stored: $stored; resident memory after the run: $((rss / 1024)) MiB"
echo "(wrk's tails understate the tail under overload: coordinated omission)"
