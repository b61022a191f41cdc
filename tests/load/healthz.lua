-- tests/load/healthz.lua — wrk script: GET /healthz (the baseline the
-- analyses rate is compared with); prints the same summary line.
done = function(summary, latency, requests)
  io.write(string.format(
    "wrk-summary requests=%d duration_s=%.3f rate=%.1f p50_ms=%.3f p99_ms=%.3f errors_status=%d errors_connect=%d errors_timeout=%d\n",
    summary.requests, summary.duration / 1e6,
    summary.requests / (summary.duration / 1e6),
    latency:percentile(50) / 1000, latency:percentile(99) / 1000,
    summary.errors.status, summary.errors.connect, summary.errors.timeout))
end
