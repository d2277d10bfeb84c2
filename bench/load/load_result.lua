-- wrk's done() for the load scripts: one line "LOAD_RESULT {json}" with the counts,
-- errors and latency percentiles (microseconds) that bench/load/wrk_runs.py reads back.
-- Loaded with dofile() by bench/load/drive.lua and bench/echo/drive_lines.lua.

function done(summary, latency, requests)
   local errors = summary.errors
   io.write(string.format(
      "\nLOAD_RESULT {\"requests\": %d, \"duration_us\": %d, \"bytes\": %d, " ..
      "\"connect\": %d, \"read\": %d, \"write\": %d, \"timeout\": %d, \"status\": %d, " ..
      "\"p50_us\": %d, \"p99_us\": %d, \"max_us\": %d}\n",
      summary.requests, summary.duration, summary.bytes,
      errors.connect, errors.read, errors.write, errors.timeout, errors.status,
      latency:percentile(50), latency:percentile(99), latency.max))
end
