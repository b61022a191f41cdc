#!/usr/bin/env bash
# tests/browser/run.sh — the browser checks of the daemon's pages and
# figures (pages.mjs): installs what they need when it is missing — Debian's
# chromium (and a font) with apt-get when run as root, the playwright-core
# pinned in package-lock.json with `npm ci` — then runs pages.mjs.  Owns
# tests/browser/node_modules and the artefacts folder it is given.
#
# Usage: bash tests/browser/run.sh path/to/swapspec path/to/artefacts-dir
# Exit status: 0 when every check passed; 77 (ctest: skipped) when chromium
# is missing and cannot be installed because we are not root; 1 otherwise.
set -uo pipefail
if [ $# -ne 2 ]; then
    echo "usage: $0 path/to/swapspec path/to/artefacts-dir" >&2
    exit 2
fi
bin=$(realpath "$1") || exit 2
artefacts=$(realpath -m "$2") || exit 2
here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)

chromium=${SWAPSPEC_CHROMIUM:-/usr/bin/chromium}
if [ ! -x "$chromium" ]; then
    if [ "$(id -u)" -ne 0 ]; then
        echo "browser: $chromium is missing; install Debian's chromium as root" \
             "(apt-get install chromium) to run these checks" >&2
        exit 77
    fi
    echo "browser: installing chromium from Debian"
    export DEBIAN_FRONTEND=noninteractive
    if ! { apt-get update -q >/dev/null &&
           apt-get install -y -q --no-install-recommends chromium \
               fonts-dejavu-core >/dev/null; }; then
        echo "browser: apt-get could not install chromium" >&2
        echo "0 passed, 1 failed"
        exit 1
    fi
fi

cd "$here" || exit 2
if [ ! -d node_modules/playwright-core ]; then
    if ! npm ci --no-audit --no-fund --loglevel=error >/dev/null; then
        echo "browser: npm ci failed (the npm registry must be reachable on the first run)" >&2
        echo "0 passed, 1 failed"
        exit 1
    fi
fi

mkdir -p "$artefacts" || exit 2
node pages.mjs "$bin" "$artefacts"
