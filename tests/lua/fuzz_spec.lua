-- A short fuzz run: every public function and method with random and hostile
-- arguments. Each call either succeeds or raises a Lua error with a string
-- message; the process never crashes (common practice for a C binding).
local ls = require "levelshift"

describe("hostile arguments", function()
  it("never crash and always raise string errors", function()
    local vals = { 0, -1, 1.5, 0 / 0, math.huge, -math.huge, "x", {}, { {} }, { { 1, 2 }, { 3 } },
      function() error("boom") end, function() return "g" end, function() return 0 / 0 end,
      ls.I, ls.matrix{ { 1 } }, ls.spin(1), ls.oscillator(3), ls.spin(1).Sz, ls.oscillator(3).x,
      1e18, -1e18, 2 ^ 62, true }
    local fns = {}
    for k, v in pairs(ls) do
      if type(v) == "function" and k ~= "config" and k:sub(1, 1) ~= "_" then fns[#fns + 1] = { k, v } end
    end
    local m = ls.oscillator(4).x
    for k, v in pairs(ls._matrix_methods) do fns[#fns + 1] = { "m:" .. k, function(...) return v(m, ...) end } end
    local b = ls.oscillator(4)
    for k, v in pairs(ls._basis_methods) do
      if k ~= "close" then fns[#fns + 1] = { "b:" .. k, function(...) return v(b, ...) end } end
    end
    local bx, rt = ls.box(3), ls.rotor(1) -- a box for B:potential's callback paths, a rotor's operators
    fns[#fns + 1] = { "box:potential", function(...) return bx:potential(...) end }
    fns[#fns + 1] = { "rotor:index", function(k) return rt[k] end }
    math.randomseed(20261202)
    local bad = {}
    for _ = 1, 3000 do
      local f = fns[math.random(#fns)]
      local a = { vals[math.random(#vals + 1)], vals[math.random(#vals + 1)], vals[math.random(#vals + 1)] }
      local ok, e = pcall(f[2], a[1], a[2], a[3])
      if not ok and type(e) ~= "string" then bad[#bad + 1] = f[1] end
      local x, y = vals[math.random(#vals)], vals[math.random(#vals)]
      pcall(function() return x + y end)
      pcall(function() return x * y end)
      pcall(function() return x ^ y end)
    end
    assert.are.same({}, bad)
  end)
end)
