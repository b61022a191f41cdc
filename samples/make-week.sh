#!/usr/bin/env bash
# samples/make-week.sh — generates samples/week/, one invented week of runs of
# the Quillfeather Cold-Atom Lab, from the true spectra and calibrations
# stated in the two tables below.  Owns every file under samples/week/:
#
#   calibrations/NAME.vN.json  the calibration versions, as bodies of
#                              PUT /v1/calibrations/NAME (version N is the
#                              N-th PUT of that name; post-week.sh keeps the
#                              order)
#   analyses/LABEL.json        one analysis request per lab run: label,
#                              measured_at, the calibration by reference
#                              ({"ref": NAME}), summary or per-shot runs
#   truth.json                 what the generator used: the true spectrum of
#                              every request, the calibration version that
#                              really described the apparatus, the atom
#                              numbers, shots and seeds, and the flags the
#                              scenario is built to show
#
# Each run is drawn by `swapspec simulate` with the TRUE calibration (the
# version whose values held at the time, which is not always the version a
# reference resolves to: that is the miscalibrated run).  Seeds follow one
# rule fixed before any file was generated, never tuned to the outcome:
#     seed = YYMMDDRRK   (date of the label, run number RR, K = 1, 2, ... the
#                         run's place in the request)
# e.g. trapA-2026-11-23-run03, its first run -> 261123031.  Summary runs keep
# mean and variance to 6 decimals, per-shot energies to 4 (0.1 mHz, far below
# the detection noise).  Output is deterministic: the same swapspec gives the
# same bytes (tests/samples/check-week.mjs regenerates and compares).
#
# Usage: samples/make-week.sh [--check] [OUTDIR]
#   OUTDIR   where to write (default samples/week)
#   --check  generate into a temporary directory and compare it with
#            samples/week byte for byte; exit 1 on any difference
# SWAPSPEC names the executable (default ./build/swapspec).  Needs node.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."

check=0
if [[ ${1:-} == --check ]]; then
    check=1
    shift
fi
out=${1:-samples/week}
bin=${SWAPSPEC:-./build/swapspec}
if [[ ! -x $bin ]]; then
    echo "make-week: no executable at $bin (build first, or set SWAPSPEC)" >&2
    exit 2
fi

# Calibration versions, oldest first within each name.
#   name          version valid_from            offset pair_shift exchange noise_sd unit note...
CALIBRATIONS='
box-trap-a      1  2026-11-16T08:00:00Z  12.5   0.8   -3.1  0.6   Hz  Quarterly calibration of trap A (two-atom spectroscopy), Odile Marchetti-Fenwick.
box-trap-a      2  2026-11-25T10:00:00Z  16.8   0.8   -3.1  0.6   Hz  Offset re-measured Wednesday 10:00 after the bias coil was re-seated on Tuesday evening (+4.3 Hz); pair shift and exchange unchanged.
box-trap-b      1  2026-11-09T08:00:00Z  -4.0   1.15   2.4  1.9   Hz  Trap B after the camera swap; the readout is noisy, so per-shot windows are wide.
box-trap-c6     1  2026-11-26T07:30:00Z   7.2   0.45   1.7  0.4   Hz  Trap C commissioned with the spin-5/2 species (d = 6), Mabyn Ferraday-Osei.
box-trap-c10    1  2026-11-27T07:30:00Z   5.9   0.3    1.2  0.35  Hz  Trap C reloaded with the spin-9/2 species (d = 10).
'

# Lab runs.  truth = the calibration version that held at the time (the
# measured_at reference may resolve to another one); atoms and shots list the
# runs of one request joined by +; kind is summary or pershot.
#   label                    measured_at           calibration truth d  kind    atoms  shots    spectrum                                            shows
RUNS='
trapA-2026-11-23-run03   2026-11-23T09:40:00Z  box-trap-a    1  3  summary 8      400      0.55,0.30,0.15                                      -
trapA-2026-11-23-run07   2026-11-23T14:15:00Z  box-trap-a    1  3  pershot 5      300      0.55,0.30,0.15                                      -
trapB-2026-11-23-run02   2026-11-23T16:30:00Z  box-trap-b    1  3  summary 10     500      0.70,0.20,0.10                                      -
trapA-2026-11-24-run02   2026-11-24T10:05:00Z  box-trap-a    1  3  summary 7+10   300+300  0.55,0.30,0.15                                      -
trapB-2026-11-24-run05   2026-11-24T15:20:00Z  box-trap-b    1  3  pershot 8      250      0.70,0.20,0.10                                      -
trapA-2026-11-25-run01   2026-11-25T08:40:00Z  box-trap-a    2  3  summary 5      1200     0.55,0.30,0.15                                      outside-physical-region
trapB-2026-11-25-run03   2026-11-25T11:10:00Z  box-trap-b    1  3  pershot 6      300      0.70,0.20,0.10                                      degenerate-energy
trapA-2026-11-25-run04   2026-11-25T13:30:00Z  box-trap-a    2  3  pershot 8      300      0.55,0.30,0.15                                      -
trapC-2026-11-26-run02   2026-11-26T10:00:00Z  box-trap-c6   1  6  summary 6+9    600+600  0.40,0.22,0.15,0.11,0.07,0.05                       underdetermined
trapA-2026-11-26-run06   2026-11-26T15:45:00Z  box-trap-a    2  3  summary 10     600      0.42,0.33,0.25                                      -
trapC-2026-11-27-run01   2026-11-27T09:30:00Z  box-trap-c10  1  10 summary 10+14  600+600  0.30,0.18,0.12,0.10,0.08,0.07,0.06,0.04,0.03,0.02  underdetermined
trapC-2026-11-27-run04   2026-11-27T14:00:00Z  box-trap-c10  1  10 summary 12     800      0.30,0.18,0.12,0.10,0.08,0.07,0.06,0.04,0.03,0.02  underdetermined
trapA-2026-11-27-run05   2026-11-27T16:20:00Z  box-trap-a    2  3  pershot 10     400      0.55,0.30,0.15                                      -
trapB-2026-11-28-run01   2026-11-28T11:00:00Z  box-trap-b    1  3  pershot 7      300      0.70,0.20,0.10                                      -
'

if ((check)); then
    tmp=$(mktemp -d)
    trap 'rm -rf "$tmp"' EXIT
    SWAPSPEC=$bin bash samples/make-week.sh "$tmp/week" >/dev/null
    if diff -r samples/week "$tmp/week"; then
        echo "make-week: samples/week is reproduced byte for byte"
        exit 0
    fi
    echo "make-week: samples/week differs from what make-week.sh generates" >&2
    exit 1
fi

rm -rf "$out/calibrations" "$out/analyses" "$out/truth.json"
mkdir -p "$out/calibrations" "$out/analyses"
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

BIN=$bin OUT=$out WORK=$work CALIBRATIONS=$CALIBRATIONS RUNS=$RUNS \
    node --input-type=module - <<'JS'
import { execFileSync } from "node:child_process";
import { writeFileSync } from "node:fs";

const { BIN, OUT, WORK, CALIBRATIONS, RUNS } = process.env;
const rows = (text) =>
    text.split("\n").map((l) => l.trim()).filter((l) => l && !l.startsWith("#"));
const round = (x, digits) => {
    const y = Number(x.toFixed(digits));
    return Object.is(y, -0) ? 0 : y;
};

/* Two-space indentation, arrays of numbers on one line. */
function render(value) {
    return JSON.stringify(value, null, 2).replace(
        /\[\s+(-?[0-9][-+.0-9e]*(?:,\s+-?[0-9][-+.0-9e]*)*)\s+\]/g,
        (_, items) => "[" + items.split(/,\s+/).join(", ") + "]") + "\n";
}

const versions = new Map(); /* name -> [body, ...] by version */
for (const line of rows(CALIBRATIONS)) {
    const w = line.split(/\s+/);
    const [name, version, valid_from, offset, pair_shift, exchange, noise_sd,
           unit] = w;
    const note = w.slice(8).join(" ");
    const list = versions.get(name) ?? [];
    if (Number(version) !== list.length + 1)
        throw new Error(`${name}: versions must be listed 1, 2, ...`);
    const body = { offset: Number(offset), pair_shift: Number(pair_shift),
                   exchange: Number(exchange), noise_sd: Number(noise_sd),
                   unit, valid_from, note };
    list.push(body);
    versions.set(name, list);
    writeFileSync(`${OUT}/calibrations/${name}.v${version}.json`, render(body));
}

const truth = [];
for (const line of rows(RUNS)) {
    const [label, measured_at, cal, truthVersion, d, kind, atoms, shots,
           spectrum, shows] = line.split(/\s+/);
    const m = /^trap[A-Z]-20(\d\d)-(\d\d)-(\d\d)-run(\d\d)$/.exec(label);
    if (!m) throw new Error(`label ${label} does not follow trapX-YYYY-MM-DD-runRR`);
    const body = versions.get(cal)?.[Number(truthVersion) - 1];
    if (!body) throw new Error(`${label}: no ${cal} version ${truthVersion}`);
    const calFile = `${WORK}/${cal}.v${truthVersion}.json`;
    const { valid_from, note, ...fields } = body;
    writeFileSync(calFile, JSON.stringify(fields));
    const atomList = atoms.split("+").map(Number);
    const shotList = shots.split("+").map(Number);
    const runs = [], runTruth = [];
    atomList.forEach((n, k) => {
        const seed = Number(`${m[1]}${m[2]}${m[3]}${m[4]}${k + 1}`);
        const sim = JSON.parse(execFileSync(BIN, [
            "simulate", "--levels", d, "--atoms", String(n), "--spectrum",
            spectrum, "--shots", String(shotList[k]), "--seed", String(seed),
            "--calibration", calFile], { maxBuffer: 64 << 20 }));
        if (kind === "summary")
            runs.push({ atoms: n, shots: sim.summary.shots,
                        mean_energy: round(sim.summary.mean_energy, 6),
                        energy_variance: round(sim.summary.energy_variance, 6) });
        else if (kind === "pershot")
            runs.push({ atoms: n, energies: sim.energies.map((e) => round(e, 4)) });
        else
            throw new Error(`${label}: kind ${kind}`);
        runTruth.push({ atoms: n, kind, shots: shotList[k], seed });
    });
    const request = { label, measured_at, levels: Number(d),
                      calibration: { ref: cal }, runs, method: "auto",
                      confidence: 0.95 };
    writeFileSync(`${OUT}/analyses/${label}.json`, render(request));
    truth.push({ label, file: `analyses/${label}.json`, measured_at,
                 levels: Number(d), spectrum: spectrum.split(",").map(Number),
                 calibration: cal, true_calibration_version: Number(truthVersion),
                 runs: runTruth, shows: shows === "-" ? [] : shows.split(",") });
}
writeFileSync(`${OUT}/truth.json`, render({
    scenario: "Quillfeather Cold-Atom Lab (invented), the week of 2026-11-23",
    generated_by: "samples/make-week.sh",
    seed_rule: "seed = YYMMDDRRK from the label's date and run number, K = the run's place in the request",
    analyses: truth,
}));
JS
echo "make-week: wrote $(find "$out" -type f | wc -l) files under $out" >&2
