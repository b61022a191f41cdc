-- tests/load/load.lua — wrk script for tests/load/run-load.sh and soak.sh.
-- `wrk ... -s load.lua URL -- analyses` posts a moments request of three
-- summary runs to /v1/analyses (the Quillfeather sample scenario, box trap
-- A, true spectrum (0.55, 0.30, 0.15); exact model means and variances for
-- 8, 12 and 16 atoms), each stored as a new analysis; `-- predictions`
-- posts the exact-law request of trap A to /v1/predictions (24 atoms of
-- 3 levels, spectrum (0.6, 0.3, 0.1), the 5 most probable diagrams, trap
-- A's calibration inline: samples/calibration-boxtrap-a.json), which
-- computes and stores nothing; without an argument it sends plain GETs
-- (the /healthz baseline).  Either way `done` prints one `wrk-summary`
-- line that the scripts read, then one `wrk-socket-errors` line with the
-- read and write errors (a connection the daemon refused or reset after
-- accepting it) that the summary line leaves out.
init = function(args)
  if args[1] == "analyses" then
    wrk.method = "POST"
    wrk.headers["Content-Type"] = "application/json"
    wrk.body = [[{"levels":3,"label":"load/boxtrap-a","method":"moments",
"runs":[{"atoms":8,"shots":300,"mean_energy":11.62,"energy_variance":31.9},
{"atoms":12,"shots":300,"mean_energy":27.39,"energy_variance":92.6},
{"atoms":16,"shots":300,"mean_energy":49.8,"energy_variance":196.0}]}]]
  elseif args[1] == "predictions" then
    wrk.method = "POST"
    wrk.headers["Content-Type"] = "application/json"
    wrk.body = [[{"levels":3,"atoms":24,"spectrum":[0.6,0.3,0.1],"top":5,
"calibration":{"offset":12.5,"pair_shift":0.8,"exchange":-3.1,
"noise_sd":0.6,"unit":"Hz"}}]]
  end
end

done = function(summary, latency, requests)
  io.write(string.format(
    "wrk-summary requests=%d duration_s=%.3f rate=%.1f p50_ms=%.3f p99_ms=%.3f errors_status=%d errors_connect=%d errors_timeout=%d\n",
    summary.requests, summary.duration / 1e6,
    summary.requests / (summary.duration / 1e6),
    latency:percentile(50) / 1000, latency:percentile(99) / 1000,
    summary.errors.status, summary.errors.connect, summary.errors.timeout))
  io.write(string.format("wrk-socket-errors errors_read=%d errors_write=%d\n",
    summary.errors.read, summary.errors.write))
end
