-- wrk script: POST one small kNN query per request, cycling through a few query outlines
-- (an L bracket, a gasket-like octagon, a clip stroke; millimetres, invented).
local shapes = {
  "POLYGON ((0 0, 41 0, 41 6.5, 6 6.5, 6 30, 0 30, 0 0))",
  "POLYGON ((20 8, 8 20, -8 20, -20 8, -20 -8, -8 -20, 8 -20, 20 -8, 20 8))",
  "LINESTRING (0 0, 0 12, 2.5 15, 5 12, 7.5 -2, 10 0, 12.5 15, 15 12)",
}
local mode = os.getenv("WAYMARK_BENCH_MODE") or "fast"
local bodies = {}
for i, shape in ipairs(shapes) do
  bodies[i] = '{"shape": "' .. shape .. '", "k": 10, "mode": "' .. mode .. '"}'
end
local counter = 0
request = function()
  counter = counter + 1
  local body = bodies[(counter % #bodies) + 1]
  return wrk.format("POST", "/v1/collections/parts/nearest", {["Content-Type"] = "application/json"}, body)
end
local failures = 0
response = function(status, headers, body)
  if status ~= 200 then failures = failures + 1 end
end
done = function(summary, latency, requests)
  io.write(string.format("mode=%s requests=%d non_200=%d errors=%d\n", mode, summary.requests,
    summary.status and summary.errors.status or 0, summary.errors.connect + summary.errors.read + summary.errors.write + summary.errors.timeout))
  io.write(string.format("requests/s=%.0f p50_ms=%.2f p90_ms=%.2f p99_ms=%.2f max_ms=%.2f\n",
    summary.requests / (summary.duration / 1e6), latency:percentile(50) / 1000, latency:percentile(90) / 1000,
    latency:percentile(99) / 1000, latency.max / 1000))
end
