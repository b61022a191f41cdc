#!/usr/bin/env bash
# deploy/run-demo.sh — first run of swapspec on a fresh Debian 12 machine.
#
# Installs the build dependencies that are missing (as root; `apt-get
# update` only when something is missing), builds the `swapspec` executable
# in build/, and predicts the energy readout of 24 atoms with spectrum
# (0.6, 0.3, 0.1) under the sample calibration of the invented
# Quillfeather lab's box trap A (samples/calibration-boxtrap-a.json).
# Progress goes to stderr; the result, one JSON object, to stdout.
# (A later version starts the HTTP service here instead.)
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."

PACKAGES=(build-essential cmake pkg-config libgsl-dev libjansson-dev
          libmicrohttpd-dev libsqlite3-dev)

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

echo "run-demo: swapspec predict --levels 3 --atoms 24 --spectrum 0.6,0.3,0.1 --calibration samples/calibration-boxtrap-a.json" >&2
./build/swapspec predict --levels 3 --atoms 24 --spectrum 0.6,0.3,0.1 \
    --calibration samples/calibration-boxtrap-a.json
