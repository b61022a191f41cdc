-- tests/load/analyses.lua — wrk script: POST /v1/analyses with a moments
-- request of three summary runs (the Quillfeather sample scenario, box trap
-- A, true spectrum (0.55, 0.30, 0.15); exact model means and variances for
-- 8, 12 and 16 atoms).  Each request stores a new analysis.
wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
wrk.body = [[{"levels":3,"label":"load/boxtrap-a","method":"moments",
"runs":[{"atoms":8,"shots":300,"mean_energy":11.62,"energy_variance":31.9},
{"atoms":12,"shots":300,"mean_energy":27.39,"energy_variance":92.6},
{"atoms":16,"shots":300,"mean_energy":49.8,"energy_variance":196.0}]}]]

done = function(summary, latency, requests)
  io.write(string.format(
    "wrk-summary requests=%d duration_s=%.3f rate=%.1f p50_ms=%.3f p99_ms=%.3f errors_status=%d errors_connect=%d errors_timeout=%d\n",
    summary.requests, summary.duration / 1e6,
    summary.requests / (summary.duration / 1e6),
    latency:percentile(50) / 1000, latency:percentile(99) / 1000,
    summary.errors.status, summary.errors.connect, summary.errors.timeout))
end
