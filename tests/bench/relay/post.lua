-- wrk script for the relay benchmark: POST the body in the file named by
-- the environment variable BENCH_BODY (a batch of readings as tidepost
-- sends it, or one reading) with the same Content-Type.
local path = os.getenv("BENCH_BODY")
local f = assert(io.open(path, "rb"), "BENCH_BODY: cannot open " .. tostring(path))
wrk.method = "POST"
wrk.body = f:read("*a")
f:close()
wrk.headers["Content-Type"] = "application/json"
