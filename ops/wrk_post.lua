-- wrk script: POST the payload named by LAGSIGHT_PAYLOAD and print a JSON summary line at the end.
local f = assert(io.open(os.getenv("LAGSIGHT_PAYLOAD"), "rb"))
wrk.method = "POST"
wrk.body = f:read("*a")
f:close()
wrk.headers["Content-Type"] = "application/json"

function done(summary, latency, requests)
  local e = summary.errors
  io.write(string.format(
    'WRK_JSON {"requests": %d, "duration_s": %.3f, "connect_errors": %d, "read_errors": %d, "write_errors": %d, ' ..
    '"non_2xx_3xx": %d, "timeouts": %d, "p50_ms": %.2f, "p99_ms": %.2f, "max_ms": %.2f}\n',
    summary.requests, summary.duration / 1e6, e.connect, e.read, e.write, e.status, e.timeout,
    latency:percentile(50) / 1000, latency:percentile(99) / 1000, latency.max / 1000))
end
