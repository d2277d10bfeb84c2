-- wrk script of bench/echo/echo_compare.py.
--
-- Arguments after "--": PATH BODIES_FILE. BODIES_FILE holds one JSON body per line; each
-- request posts one of them, drawn at random from a generator seeded by the thread's
-- number, so a rerun sends the same sequence. A file of one line repeats that body.
--
-- done() prints one line "LOAD_RESULT {json}" (bench/load/load_result.lua).

local threads = {}
local requests_raw = {}

function setup(thread)
   thread:set("number", #threads + 1)
   table.insert(threads, thread)
end

function init(args)
   math.randomseed(number or 1)
   local path, bodies_file = args[1], args[2]
   assert(path and bodies_file, "usage: -- PATH BODIES_FILE")
   local headers = { ["Accept"] = "application/json", ["Content-Type"] = "application/json" }
   for line in io.lines(bodies_file) do
      if line ~= "" then
         table.insert(requests_raw, wrk.format("POST", path, headers, line))
      end
   end
   assert(#requests_raw > 0, "no body in " .. bodies_file)
end

function request()
   if #requests_raw == 1 then
      return requests_raw[1]
   end
   return requests_raw[math.random(#requests_raw)]
end

-- done(): the LOAD_RESULT line, written once for both load scripts.
local here = debug.getinfo(1, "S").source:sub(2):match("^(.*)/") or "."
dofile(here .. "/../load/load_result.lua")
