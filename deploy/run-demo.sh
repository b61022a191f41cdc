#!/usr/bin/env bash
# deploy/run-demo.sh — first run of swapspec on a fresh Debian 12 machine.
#
# Installs the build dependencies that are missing (as root; `apt-get
# update` only when something is missing), builds the `swapspec` executable
# in build/, and starts the HTTP service on its embedded default: loopback
# only (127.0.0.1:8080, no tokens needed there) with the SQLite store
# ./var/swapspec.db.  Once it answers, the sample week of the invented
# Quillfeather lab (samples/week/: calibration versions, then fourteen runs)
# is posted to it with samples/post-week.sh, one line per request on stdout;
# rerunning the script finds and replays them instead of storing them twice.
# A build whose route table has no calibration endpoints yet posts the single
# sample analysis (samples/analysis-request.json) instead and prints the
# stored record.  The service keeps running in the foreground until Ctrl-C
# (SIGINT) or SIGTERM, which it handles by finishing the requests in flight.
# SWAPSPEC_LISTEN / SWAPSPEC_DATA override the address and the store.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."

PACKAGES=(build-essential cmake pkg-config libgsl-dev libjansson-dev
          libmicrohttpd-dev libgnutls28-dev libsqlite3-dev curl)

missing=()
for pkg in "${PACKAGES[@]}"; do
    if ! dpkg-query -W -f='${Status}' "$pkg" 2>/dev/null |
            grep -q 'install ok installed'; then
        missing+=("$pkg")
    fi
done
if ((${#missing[@]} > 0)); then
    if [[ $(id -u) -ne 0 ]]; then
        echo "run-demo: missing packages: ${missing[*]}; run as root (sudo)" >&2
        exit 1
    fi
    echo "run-demo: installing ${missing[*]}" >&2
    apt-get update >&2
    DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends \
        "${missing[@]}" >&2
fi

echo "run-demo: building swapspec in build/" >&2
cmake -S . -B build >&2
cmake --build build -j "${JOBS:-2}" --target swapspec >&2

listen=${SWAPSPEC_LISTEN:-127.0.0.1:8080}
data=${SWAPSPEC_DATA:-./var/swapspec.db}
echo "run-demo: starting swapspec serve --listen $listen --data $data" >&2
./build/swapspec serve --listen "$listen" --data "$data" &
pid=$!
trap 'kill -TERM "$pid" 2>/dev/null || true; wait "$pid"' INT TERM
for _ in $(seq 1 50); do
    curl -sf "http://$listen/healthz" >/dev/null 2>&1 && break
    sleep 0.1
done
if ./build/swapspec routes | grep -q '/v1/calibrations/{name}'; then
    echo "run-demo: posting the sample week (samples/post-week.sh)" >&2
    SWAPSPEC_TOKEN='' bash samples/post-week.sh "http://$listen" ||
        echo "run-demo: some posts failed (see the lines above)" >&2
else
    echo "run-demo: posting samples/analysis-request.json to /v1/analyses" >&2
    curl -sf -X POST -H 'Content-Type: application/json' \
        -H 'Idempotency-Key: "demo-quillfeather-boxtrap-a"' \
        --data-binary @samples/analysis-request.json \
        "http://$listen/v1/analyses" || echo "run-demo: the post failed" >&2
    echo >&2
fi
echo "run-demo: serving on http://$listen (Ctrl-C stops it)" >&2
wait "$pid"
