-- wrk script of bench/query.py: after the run, one line with the request
-- and error counts and the latency percentiles in microseconds (wrk keeps
-- every request's latency at microsecond resolution).
done = function(summary, latency, requests)
  local errors = summary.errors
  io.write(string.format(
    "result requests=%d errors=%d status_errors=%d p50_us=%d p95_us=%d p99_us=%d max_us=%d\n",
    summary.requests, errors.connect + errors.read + errors.write + errors.timeout,
    errors.status, latency:percentile(50), latency:percentile(95),
    latency:percentile(99), latency.max))
end
