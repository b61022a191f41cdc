#!/usr/bin/env bash
# tests/fuzz/run.sh — builds swapspec's libFuzzer targets with clang and runs
# each for a bounded time.
#
#   bash tests/fuzz/run.sh [SECONDS]      (per target; default 60)
#
# It configures tests/fuzz/CMakeLists.txt with clang in its own build
# directory (FUZZ_BUILD_DIR, default build-fuzz/): the code under test is
# built for coverage and with AddressSanitizer + UndefinedBehaviorSanitizer
# (-fsanitize=fuzzer,address,undefined -fno-sanitize-recover=undefined).
# Each target starts from its checked-in seeds (tests/fuzz/corpus/<target>/),
# the saved regressions (tests/fuzz/regressions/<target>/) and the inputs
# earlier runs in the same build directory found (FUZZ_BUILD_DIR/corpus/
# <target>/, where new inputs are written), with the dictionary
# tests/fuzz/dict/<target>.dict.
#
# Per target it prints executions, executions per second, and libFuzzer's
# final coverage (cov: edges, ft: features) and corpus size.  It fails when
# any target reports a crash, a leak, a timeout (FUZZ_TIMEOUT seconds per
# input, default 10), running out of memory (FUZZ_RSS_MB, default 2048), or
# a failed invariant ("INVARIANT VIOLATED"); the input is kept under
# FUZZ_BUILD_DIR/artifacts/<target>/ and the line to turn it into a
# regression test (tests/fuzz/regressions/<target>/) is printed.
#
# FUZZ_TARGETS   targets to run (default: all four)
# FUZZ_FRESH     fail (default) or report: what a failure on an input found
#                during this run (after libFuzzer's INITED line, i.e. after
#                the seeds, the saved regressions and earlier finds all ran
#                clean) does.  `report` prints it as a NEW FINDING with the
#                command that keeps it, and the run still passes; a failure
#                while replaying those inputs always fails the run.
# FUZZ_PARALLEL  targets run at once (default 1; CI uses 2 on its 2 cores)
# FUZZ_CC        the compiler (default clang; a wrapper that adds flags)
# JOBS           build parallelism (default 2)
# Longer runs: FUZZ_PARALLEL=2 bash tests/fuzz/run.sh 3600
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/../.."

SECONDS_PER_TARGET=${1:-60}
BUILD=${FUZZ_BUILD_DIR:-build-fuzz}
read -r -a TARGETS <<<"${FUZZ_TARGETS:-analysis_body compute_body query_path inversion}"
PARALLEL=${FUZZ_PARALLEL:-1}
TIMEOUT=${FUZZ_TIMEOUT:-10}
RSS_MB=${FUZZ_RSS_MB:-2048}
JOBS=${JOBS:-2}
FRESH=${FUZZ_FRESH:-fail}

if ! [[ $SECONDS_PER_TARGET =~ ^[0-9]+$ ]] || ((SECONDS_PER_TARGET < 1)); then
    echo "usage: bash tests/fuzz/run.sh [SECONDS per target]" >&2
    exit 2
fi

echo "fuzz: building the targets in $BUILD (${FUZZ_CC:-clang})"
if ! cmake -S tests/fuzz -B "$BUILD" -DCMAKE_C_COMPILER="${FUZZ_CC:-clang}" \
        >"$BUILD.configure.log" 2>&1; then
    cat "$BUILD.configure.log"
    echo "fuzz: configuring the fuzz build failed"
    exit 1
fi
rm -f "$BUILD.configure.log"
cmake --build "$BUILD" -j "$JOBS"

# ASan: a small quarantine keeps freed memory in use, which spares the
# page faults of fresh mappings in the allocation-heavy likelihood (UAFs
# are still caught within the quarantine); leaks are checked per input.
export ASAN_OPTIONS="quarantine_size_mb=16:detect_leaks=1"
export LSAN_OPTIONS="suppressions=$PWD/tests/lsan-suppressions.txt"
export UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1"

run_target() {
    local t=$1
    local work="$BUILD/corpus/$t" art="$BUILD/artifacts/$t"
    mkdir -p "$work" "$art" "$BUILD/logs"
    # a fixed seed by default, so that the CI stage is repeatable (the same
    # mutations from the same corpus); FUZZ_SEED=0 lets libFuzzer pick one
    local args=(-max_total_time="$SECONDS_PER_TARGET" -timeout="$TIMEOUT"
                -seed="${FUZZ_SEED:-1}"
                -rss_limit_mb="$RSS_MB" -print_final_stats=1
                -artifact_prefix="$art/")
    if [[ -f tests/fuzz/dict/$t.dict ]]; then
        args+=(-dict="tests/fuzz/dict/$t.dict")
    fi
    # new inputs go to $work; the seeds and the saved regressions are read
    # (and run first, so a regression fails here with UBSan's full checks)
    local dirs=("$work" "tests/fuzz/corpus/$t")
    if [[ -d tests/fuzz/regressions/$t ]]; then
        dirs+=("tests/fuzz/regressions/$t")
    fi
    local rc=0
    "$BUILD/fuzz_$t" "${args[@]}" "${dirs[@]}" >"$BUILD/logs/$t.log" 2>&1 ||
        rc=$?
    echo "$rc" >"$BUILD/logs/$t.rc"
}

# runs the targets, PARALLEL at a time
pending=("${TARGETS[@]}")
while ((${#pending[@]} > 0)); do
    batch=("${pending[@]:0:PARALLEL}")
    pending=("${pending[@]:PARALLEL}")
    echo "fuzz: running ${batch[*]} for ${SECONDS_PER_TARGET} s each"
    for t in "${batch[@]}"; do
        run_target "$t" &
    done
    wait
done

failed=0
reported=0
printf 'fuzz: %-14s %12s %9s %7s %7s %7s  %s\n' target executions exec/s \
    cov ft corpus verdict
for t in "${TARGETS[@]}"; do
    log="$BUILD/logs/$t.log"
    rc=$(cat "$BUILD/logs/$t.rc" 2>/dev/null || echo 1)
    execs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -1)
    rate=$(sed -n 's/^stat::average_exec_per_sec: *//p' "$log" | tail -1)
    last=$(grep -E '^#[0-9]+.*cov: [0-9]+ ft: [0-9]+' "$log" | tail -1 || true)
    cov=$(sed -n 's/.*cov: \([0-9]*\).*/\1/p' <<<"$last")
    ft=$(sed -n 's/.* ft: \([0-9]*\).*/\1/p' <<<"$last")
    corp=$(sed -n 's/.* corp: \([0-9]*\).*/\1/p' <<<"$last")
    verdict=ok
    # report only: the failure came from an input new in this run (after the
    # corpus replay) and FUZZ_FRESH=report
    report_only=0
    if [[ $rc != 0 && $FRESH == report ]] &&
        grep -q '^#[0-9]*[[:space:]]*INITED' "$log"; then
        report_only=1
    fi
    if [[ $rc != 0 ]]; then
        if [[ $report_only == 1 ]]; then
            reported=$((reported + 1))
        else
            failed=$((failed + 1))
        fi
        if grep -q 'INVARIANT VIOLATED' "$log"; then
            verdict="invariant violated"
        elif grep -q 'ERROR: libFuzzer: timeout' "$log"; then
            verdict="timeout (> ${TIMEOUT} s)"
        elif grep -qE 'ERROR: libFuzzer: (out-of-memory|malloc limit)' "$log"; then
            verdict="out of memory"
        elif grep -q 'ERROR: LeakSanitizer' "$log"; then
            verdict="leak"
        elif grep -qE 'runtime error:|ERROR: AddressSanitizer|deadly signal' "$log"; then
            verdict="crash"
        else
            verdict="failed (exit $rc)"
        fi
        if [[ $report_only == 1 ]]; then
            verdict="$verdict: NEW FINDING (reported, not failing the run)"
        fi
    fi
    printf 'fuzz: %-14s %12s %9s %7s %7s %7s  %s\n' "$t" "${execs:-?}" \
        "${rate:-?}" "${cov:-?}" "${ft:-?}" "${corp:-?}" "$verdict"
    if [[ $rc != 0 ]]; then
        grep -E 'INVARIANT VIOLATED|ERROR: |runtime error:|SUMMARY: ' "$log" |
            head -5 | sed 's/^/fuzz:     /'
        input=$(sed -n 's/.*Test unit written to \(.*\)$/\1/p' "$log" | tail -1)
        if [[ -n $input ]]; then
            echo "fuzz:     input: $input"
            echo "fuzz:     replay: $BUILD/fuzz_$t $input"
            saved=""
            for f in tests/fuzz/regressions/"$t"/*; do
                if [[ -f $f ]] && cmp -s "$f" "$input"; then
                    saved=$f
                fi
            done
            if [[ -n $saved ]]; then
                echo "fuzz:     a saved regression still fails: $saved"
            else
                echo "fuzz:     keep it: cp $input tests/fuzz/regressions/$t/"
            fi
        fi
        echo "fuzz:     log: $log"
    fi
done
if ((reported > 0)); then
    echo "fuzz: $reported new finding(s) reported above: turn each into a" \
        "regression (keep it: …) and fix it"
fi
if ((failed > 0)); then
    echo "fuzz: $failed target(s) failed"
    exit 1
fi
echo "fuzz: all ${#TARGETS[@]} targets ran clean"
