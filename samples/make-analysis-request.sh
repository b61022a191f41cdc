#!/usr/bin/env bash
# samples/make-analysis-request.sh — regenerates samples/analysis-request.json
# from stated true spectra with `swapspec simulate` (seeded, so the file is
# reproducible).  Scenario: box trap A of the invented Quillfeather lab,
# d = 3, true spectrum (0.55, 0.30, 0.15); one summary run of 12 atoms
# (300 shots) and one per-shot run of 8 atoms (120 shots).
# Needs python3 (standard library only) to assemble the JSON.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
bin=${SWAPSPEC:-./build/swapspec}
cal=samples/calibration-boxtrap-a.json
summary=$("$bin" simulate --levels 3 --atoms 12 --spectrum 0.55,0.30,0.15 \
    --shots 300 --seed 20261201 --calibration "$cal")
pershot=$("$bin" simulate --levels 3 --atoms 8 --spectrum 0.55,0.30,0.15 \
    --shots 120 --seed 20261202 --calibration "$cal")
SUMMARY=$summary PERSHOT=$pershot CAL=$cal python3 - <<'PY' > samples/analysis-request.json
import json, os
cal = json.load(open(os.environ["CAL"]))
s = json.loads(os.environ["SUMMARY"])["summary"]
e = json.loads(os.environ["PERSHOT"])["energies"]
req = {
    "levels": 3,
    "label": "quillfeather/boxtrap-a/2026-11-30/demo",
    "calibration": cal,
    "runs": [
        {"atoms": 12, "shots": s["shots"], "mean_energy": round(s["mean_energy"], 6),
         "energy_variance": round(s["energy_variance"], 6)},
        {"atoms": 8, "energies": [round(x, 6) for x in e]},
    ],
    "method": "auto",
    "confidence": 0.95,
}
print(json.dumps(req, indent=1))
PY
echo "wrote samples/analysis-request.json"
