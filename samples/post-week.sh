#!/usr/bin/env bash
# samples/post-week.sh — posts the sample week (samples/week/) to a running
# swapspec daemon, the way the lab's dashboard would.  Owns nothing on disk.
#
#   1. Calibration versions, in order (NAME.v1.json before NAME.v2.json):
#      GET /v1/calibrations/NAME?version=N first; a version that is already
#      there is left alone (compared field by field when node is at hand: a
#      different body is a conflict), a missing one is PUT, and the version
#      number the daemon gives it must be N.
#   2. Each analysis request, in order of measured_at, with POST
#      /v1/analyses and the Idempotency-Key "quillfeather-week-LABEL": a
#      second run replays the stored analyses (200, Idempotent-Replayed)
#      instead of storing them again.
# One line per request: method, path, what, HTTP status, outcome.  Safe to
# rerun.  Exit status 0 when every request succeeded (or found its result
# already stored), 1 otherwise.
#
# Usage: samples/post-week.sh URL [TOKEN]
#   URL    the daemon, e.g. http://127.0.0.1:8080
#   TOKEN  a bearer token with the admin role (PUT needs it); or set
#          SWAPSPEC_TOKEN, which keeps it out of the process list.  Without a
#          token the daemon must run without a tokens file (loopback only).
# Needs curl.
set -uo pipefail
if [[ $# -lt 1 || $# -gt 2 ]]; then
    echo "usage: $0 URL [TOKEN]" >&2
    exit 2
fi
url=${1%/}
token=${2:-${SWAPSPEC_TOKEN:-}}
cd "$(dirname "${BASH_SOURCE[0]}")/week" || exit 2

tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
# curl reads the Authorization header from a file of its own (mode 0600), so
# the token never appears on a command line
: >"$tmp/auth"
chmod 600 "$tmp/auth"
[[ -n $token ]] && printf 'header = "Authorization: Bearer %s"\n' "$token" >"$tmp/auth"

failures=0
# call METHOD PATH [BODY-FILE [IDEMPOTENCY-KEY]]: sets $code; the body of the
# answer is in $tmp/body, its headers in $tmp/head
call() {
    local args=(-sS -K "$tmp/auth" -o "$tmp/body" -D "$tmp/head" -w '%{http_code}' -X "$1")
    if [[ -n ${3:-} ]]; then
        args+=(-H 'Content-Type: application/json' --data-binary "@$3")
    fi
    [[ -n ${4:-} ]] && args+=(-H "Idempotency-Key: \"$4\"")
    code=$(curl "${args[@]}" "$url$2" 2>"$tmp/err") || code=000
}
# the problem document's detail, or curl's complaint
why() {
    local d
    d=$(sed -n 's/.*"detail": *"\([^"]*\)".*/\1/p' "$tmp/body" 2>/dev/null | head -1)
    [[ -z $d ]] && d=$(head -c 200 "$tmp/err")
    printf '%s' "$d"
}
# same_calibration FILE: 0 when the stored version ($tmp/body) has the
# file's fields (numbers and times compared as values); 2 without node
same_calibration() {
    command -v node >/dev/null 2>&1 || return 2
    node - "$1" "$tmp/body" <<'JS'
const fs = require('fs');
const want = JSON.parse(fs.readFileSync(process.argv[2], 'utf8'));
const doc = JSON.parse(fs.readFileSync(process.argv[3], 'utf8'));
const got = { ...doc, ...(doc.calibration && typeof doc.calibration === 'object' ? doc.calibration : {}) };
const same = Object.entries(want).every(([k, v]) =>
  k === 'valid_from' ? Date.parse(got[k]) === Date.parse(v) : got[k] === v);
process.exit(same ? 0 : 1);
JS
}

# --- 1. calibration versions --------------------------------------------------
for f in $(printf '%s\n' calibrations/*.json | sort -V); do
    base=$(basename "$f" .json)
    name=${base%.v*}
    version=${base##*.v}
    call GET "/v1/calibrations/$name?version=$version"
    if [[ $code == 200 ]]; then
        same_calibration "$f"
        case $? in
        0) echo "PUT  /v1/calibrations/$name  v$version  $code  exists (same fields)" ;;
        2) echo "PUT  /v1/calibrations/$name  v$version  $code  exists (not compared: no node)" ;;
        *)
            echo "PUT  /v1/calibrations/$name  v$version  $code  CONFLICT: the stored version differs from $f"
            failures=$((failures + 1))
            ;;
        esac
        continue
    fi
    if [[ $code != 404 ]]; then
        echo "PUT  /v1/calibrations/$name  v$version  $code  FAILED looking it up: $(why)"
        failures=$((failures + 1))
        continue
    fi
    call PUT "/v1/calibrations/$name" "$f"
    got=$(sed -n 's/.*"version": *\([0-9][0-9]*\).*/\1/p' "$tmp/body" | head -1)
    if [[ $code == 200 || $code == 201 ]] && [[ $got == "$version" ]]; then
        echo "PUT  /v1/calibrations/$name  v$version  $code  stored"
    elif [[ $code == 200 || $code == 201 ]]; then
        echo "PUT  /v1/calibrations/$name  v$version  $code  stored as version ${got:-?}: the store had other versions of $name"
        failures=$((failures + 1))
    else
        echo "PUT  /v1/calibrations/$name  v$version  $code  FAILED: $(why)"
        failures=$((failures + 1))
    fi
done

# --- 2. analyses, oldest first -----------------------------------------------
for f in analyses/*.json; do
    at=$(sed -n 's/^ *"measured_at": *"\([^"]*\)".*/\1/p' "$f" | head -1)
    printf '%s %s\n' "${at:-0}" "$f"
done | sort | while read -r _ f; do
    label=$(basename "$f" .json)
    call POST /v1/analyses "$f" "quillfeather-week-$label"
    where=$(tr -d '\r' <"$tmp/head" | sed -n 's/^[Ll]ocation: *//p' | head -1)
    case $code in
    201) echo "POST /v1/analyses  $label  $code  created $where" ;;
    200) echo "POST /v1/analyses  $label  $code  replayed $where" ;;
    *)
        echo "POST /v1/analyses  $label  $code  FAILED: $(why)"
        echo x >>"$tmp/failed"
        ;;
    esac
done
[[ -f $tmp/failed ]] && failures=$((failures + $(wc -l <"$tmp/failed")))

if ((failures)); then
    echo "post-week: $failures request(s) failed" >&2
    exit 1
fi
echo "post-week: the week is stored at $url" >&2
exit 0
