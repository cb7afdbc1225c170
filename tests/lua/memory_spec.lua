-- The collector must see the core's memory: a loop that makes large dense
-- products and drops them must not pile up dead matrices between cycles
-- (before the fix, 3000 dropped 200x200 products held about 550 MB).
-- Measured through /proc/self/status (Linux); skipped under AddressSanitizer,
-- whose quarantine holds freed memory on purpose.
local ls = require "levelshift"

local function rss_kb()
  local f = io.open("/proc/self/status")
  if not f then return nil end
  local s = f:read("a")
  f:close()
  return tonumber(s:match("VmRSS:%s*(%d+)"))
end

describe("memory of dropped objects", function()
  it("is returned while a loop runs, not only at the end", function()
    if not rss_kb() or os.getenv("ASAN_OPTIONS") then
      pending("needs /proc and a build without AddressSanitizer")
      return
    end
    local o = ls.oscillator(200)
    local _, U = ls.eigen(o.x * o.x) -- dense 200x200, 320 kB
    collectgarbage("collect")
    local before = rss_kb()
    for _ = 1, 3000 do
      local m = U * 1.0001
      assert.are.equal("dense", (m:storage()))
    end
    local grown = rss_kb() - before
    assert.is_true(grown < 150 * 1024, "resident memory grew by " .. grown .. " kB")
  end)
end)
