-- tests/fuzz/long.lua -- a long fuzz run on its own (see DEVELOPERS.md):
--   build-asan/levelshift tests/fuzz/long.lua calls=100000 seed=7 [trace=1] [every=10000] [coverage=1]
-- Prints progress every `every` calls and, at the end, each distinct finding
-- (errors that are not strings or do not name the function) and every call
-- slower than `slow` seconds; exits 1 if there was a finding. A crash or a
-- sanitizer report ends the process: rerun with the same seed and trace=1 to
-- see the last call (the run is deterministic for a given seed and build).
local p = params or {}
local dir = debug.getinfo(1, "S").source:match("^@(.*)/[^/]*$") or "."
local H = dofile(dir .. "/harness.lua")
local calls = math.tointeger(p.calls) or 100000
local every = math.tointeger(p.every) or 10000
local trace
if p.trace then
  trace = function(what)
    io.stderr:write(what, "\n")
    io.stderr:flush()
  end
end
local F = H.new(ls, { seed = math.tointeger(p.seed) or 1, trace = trace, slow = tonumber(p.slow) or 2 })
local t0 = ls.clock()
local done = 0
while done < calls do
  local n = math.min(every, calls - done)
  F.run(n)
  done = done + n
  local rss = "?"
  local st = io.open("/proc/self/status")
  if st then
    rss = (st:read("a"):match("VmRSS:%s*(%d+ kB)")) or "?"
    st:close()
  end
  io.write(string.format("fuzz: %d calls, %d returned, %d raised, %.1f s, resident %s\n", F.calls, F.ok, F.errors,
    ls.clock() - t0, rss))
  io.flush()
end
local lines = F.report()
for _, l in ipairs(lines) do print(l) end
local names = {}
for k in pairs(F.byname) do names[#names + 1] = k end
print(string.format("fuzz: %d distinct functions, methods and operators called", #names))
if p.coverage then -- which ones never returned normally (their deeper paths were not reached)
  table.sort(names)
  for _, k in ipairs(names) do
    if not F.okname[k] then print(string.format("never returned: %s (%d calls)", k, F.byname[k])) end
  end
end
F.finish()
local nfind = 0
for _ in pairs(F.findings) do nfind = nfind + 1 end
print(string.format("fuzz: seed %s, %d calls, %d findings, %d slow calls", tostring(p.seed or 1), F.calls,
  nfind, #F.slow))
os.exit(nfind == 0 and 0 or 1, true)
