-- A short, deterministic fuzz run (tests/fuzz/harness.lua): every public
-- function, method and operator with random and hostile arguments. Each call
-- either returns or raises a Lua error whose value is a string naming the
-- function; the process never crashes (common practice for a C binding).
-- Long runs: tests/fuzz/long.lua (DEVELOPERS.md, "Fuzzing").
local ls = require "levelshift"
local src = os.getenv("LVS_SOURCE_DIR") or "."
local H = dofile(src .. "/tests/fuzz/harness.lua")

describe("hostile arguments", function()
  it("never crash and always raise string errors that name the function", function()
    local function listing()
      local p = io.popen("ls -A")
      local s = p:read("a")
      p:close()
      return s
    end
    local before = listing()
    local F = H.new(ls, { seed = 20261202, slow = 2 })
    F.run(4000)
    local report = F.report()
    F.finish()
    assert.are.same({}, report)
    assert.are.equal(before, listing()) -- it wrote no files
    for _, k in ipairs(F.keys) do assert.is_nil(H.WRITER_KEYS[k], k) end
    assert.is_true(F.ok > 200 and F.errors > 1000) -- both paths were exercised
  end)

  it("finds every function of the module and the methods of each object type", function()
    local F = H.new(ls, { seed = 7 })
    local paths = {}
    for _, f in ipairs(F.funcs) do paths[f.path] = true end
    for _, name in ipairs { "ls.matrix", "ls.eigen", "ls.perturb", "ls.effective", "ls.sweep", "ls.transition",
      "ls.pulse.gaussian", "ls.basis", "ls.spin", "ls.oscillator", "ls.product" } do
      assert.is_true(paths[name], name)
    end
    assert.is_nil(paths["ls._run_recipe"]) -- private names are skipped
    local mts = {}
    for _, k in ipairs(F.metatables) do mts[k] = true end
    assert.is_true(mts["levelshift.matrix"] and mts["levelshift.basis"] and mts["levelshift.sweep"])
    F.run(300)
    assert.truthy(F.methods("levelshift.matrix"))
    local has = {}
    for _, m in ipairs(F.methods("levelshift.matrix")) do has[m] = true end
    assert.is_true(has.get and has.set and has.adj and has.totable) -- C and Lua methods
    for _, m in ipairs(F.methods("levelshift.sweep") or {}) do
      assert.is_false(H.excluded(m), m) -- writers and plotters are never fuzzed
    end
    F.finish()
  end)

  it("is deterministic for a seed", function()
    local a = H.new(ls, { seed = 99 })
    a.run(500)
    local na, oka = a.calls, a.ok
    a.finish()
    local b = H.new(ls, { seed = 99 })
    b.run(500)
    assert.are.equal(na, b.calls)
    assert.are.equal(oka, b.ok)
    b.finish()
  end)

  it("survives objects closed by the callback that is using them", function()
    -- a callback closes the basis diag() is walking, and the op eigen() reads
    local B = ls.spin(1)
    local ok, e = pcall(function()
      return B:diag(function(s) B:close() return s.index end)
    end)
    assert.is_true(ok or type(e) == "string")
    assert.error_matches(function() return B:dim() end, "closed basis", 1, true)
    local H0 = ls.matrix { { 1, 0 }, { 0, 2 } }
    local opts = setmetatable({}, { __index = function() H0:close() end })
    ok, e = pcall(ls.eigen, H0, opts)
    assert.is_true(ok or type(e) == "string")
    assert.error_matches(function() return H0:dim() end, "closed matrix", 1, true)
    -- a finalizer called by hand: like close for ops and bases, refused for
    -- objects a running function may hold, and for the module's context
    local B2 = ls.spin(1)
    ok = pcall(B2.diag, B2, function() getmetatable(B2).__gc(B2) return 1 end)
    assert.error_matches(function() return B2:dim() end, "closed basis", 1, true)
    local s = ls.spin(0.5)
    local tr
    tr = ls.transition { H0 = s.Sz, V = s.Sx, from = 1, t0 = -1, t1 = 1, steps = 16,
      pulse = function() if tr then getmetatable(tr).__gc(tr) end return 0.1 end }
    assert.error_matches(function() return tr:exact() end, "may be in use by a running levelshift function", 1, true)
    assert.error_matches(function() getmetatable(ls._ctx).__gc(ls._ctx) end, "freed by the collector only", 1, true)
    assert.are.equal(3, #ls.eigen(ls.spin(1).Sz)) -- and the module carries on
    collectgarbage("collect")
  end)
end)
