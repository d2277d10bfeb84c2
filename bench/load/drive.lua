-- wrk script of the load driver (bench/load/run_load.py).
--
-- Arguments after "--": one per kind of call, each "WEIGHT,METHOD,PATH,ACCEPT,BODY_FILE"
-- (BODY_FILE empty for a call without a body). With one argument every request is that
-- call; with several, each request picks one at random in proportion to the weights,
-- from a generator seeded by the thread's number, so a rerun sends the same mix.
--
-- done() prints one line "LOAD_RESULT {json}" that the driver reads: completed
-- requests, socket errors by kind, responses with status 400 or above, and latency
-- percentiles in microseconds.

local threads = {}
local calls = {}
local total_weight = 0

function setup(thread)
   thread:set("number", #threads + 1)
   table.insert(threads, thread)
end

local function read_file(path)
   local file = assert(io.open(path, "rb"))
   local content = file:read("*a")
   file:close()
   return content
end

function init(args)
   math.randomseed(number or 1)
   for _, spec in ipairs(args) do
      local weight, method, path, accept, body_file =
         spec:match("^(%d+),(%u+),([^,]+),([^,]+),(.*)$")
      assert(weight, "bad call specification: " .. spec)
      local headers = { ["Accept"] = accept }
      local body = nil
      if body_file ~= "" then
         body = read_file(body_file)
         headers["Content-Type"] = "application/json"
      end
      total_weight = total_weight + tonumber(weight)
      table.insert(calls, {
         upto = total_weight,
         raw = wrk.format(method, path, headers, body),
      })
   end
   assert(#calls > 0, "no call given after --")
end

function request()
   if #calls == 1 then
      return calls[1].raw
   end
   local draw = math.random(total_weight)
   for _, call in ipairs(calls) do
      if draw <= call.upto then
         return call.raw
      end
   end
end

-- done(): the LOAD_RESULT line, written once for both load scripts.
local here = debug.getinfo(1, "S").source:sub(2):match("^(.*)/") or "."
dofile(here .. "/load_result.lua")
