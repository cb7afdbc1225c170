-- tests/fuzz/harness.lua -- the fuzz generator behind tests/lua/fuzz_spec.lua
-- (a short run in the test command) and tests/fuzz/long.lua (long runs).
--
-- It calls every public function of the module (ls.*, and one level of
-- sub-tables such as ls.pulse.*) and every method of every object type with
-- random and hostile arguments: wrong types, nil, NaN, inf, huge and negative
-- sizes, mismatched objects, closed and collected objects, tables with holes or
-- with metatables that raise, callbacks that raise, return garbage, collect
-- garbage or close the object being worked on. Functions and methods are found
-- at run time (the module table, the metatables "levelshift.*" in the
-- registry, the method tables they expose), so a new feature is fuzzed without
-- editing this file; give it a seed constructor in SEEDS below so its objects
-- are in the pool from the first call.
--
-- Contract checked (common practice for a C binding; DESIGN.md, "Errors"):
-- every call either returns or raises a Lua error whose value is a string
-- naming the function (its name appears in the message); a callback's own
-- error may come through unchanged. A crash or a sanitizer report ends the
-- process, which is the failure the long run looks for.
--
-- Not covered: plain functions inside recipe model tables (reference values
-- such as m.exact(level)); models enter the pool as hostile arguments only.
-- Excluded from random calls: anything that writes files or starts programs
-- (names matching WRITERS), and calls that change module-wide state
-- (STATEFUL; config is called, then reset). Those have targeted tests.
local H = {}

local WRITERS = { "^write", "^plot", "^save", "^export", "^dump" }
local STATEFUL = { add_dir = true, attach = true }
-- option names that make a function write files (sweep{out=, plot=}): never
-- learned from error messages, so the fuzz writes nothing
local WRITER_KEYS = { out = true, plot = true, journal = true, shard = true, merge = true, file = true,
  path = true, output = true, dir = true, progress = true }
H.WRITERS, H.STATEFUL, H.WRITER_KEYS = WRITERS, STATEFUL, WRITER_KEYS

-- Functions whose errors name the thing the user called instead: the
-- recipe runner behind `levelshift RECIPE ...` and its help speak as 'recipe'.
local ALIASES = { ["ls.recipes.run"] = "recipe", ["ls.recipes.help"] = "recipe" }
H.ALIASES = ALIASES

local CB_MSG = "fuzz-callback-raised"
local CB_OBJ = setmetatable({}, { __name = "fuzz-error-object" })

local function excluded(name)
  if name:sub(1, 1) == "_" or STATEFUL[name] then return true end
  for _, p in ipairs(WRITERS) do
    if name:match(p) then return true end
  end
  return false
end
H.excluded = excluded

local function sorted_keys(t)
  local k = {}
  for key in pairs(t) do
    if type(key) == "string" then k[#k + 1] = key end
  end
  table.sort(k)
  return k
end

-- Seed constructors: each returns objects for the pool. Failures are skipped,
-- so a feature that is absent (or renamed) costs nothing. Kept small so that
-- calls stay fast; dimensions 2..8.
local SEEDS = {
  function(ls) return ls.matrix { { 1.3, 0.4 }, { 0.4, -0.7 } } end,
  function(ls) return ls.matrix { { 0.2, 1 + 2 * ls.I }, { 1 - 2 * ls.I, -0.3 } } end,
  function(ls) return ls.matrix { { 1, 2, 3 }, { 4, 5, 6 } } end,
  function(ls) return ls.zeros(3) end,
  function(ls) return ls.zeros(2, 3, true) end,
  function(ls) return ls.complex(0.3, -1.1), ls.I end,
  function(ls) local o = ls.oscillator(5) return o, o.x, o.p, o.number, o.lower, o.raise end,
  function(ls) local s = ls.spin(1) return s, s.Sx, s.Sy, s.Sz, s.Sp, s.Sm end,
  function(ls) local s = ls.spin(0.5) return s, s.Sz end,
  function(ls) local p = ls.product(ls.spin(0.5), 2) local st = p:site(1) return p, st, st.Sz end,
  function(ls) return ls.product(ls.spin(0.5), ls.oscillator(2)) end,
  -- 1024 states: its site operators are site sums (localsum.c) until written out
  function(ls)
    local p = ls.product(ls.spin(0.5), 10)
    local a, b = p:site(1), p:site(2)
    return p, a.Sz * b.Sz + 0.5 * (a.Sp * b.Sm), a.Sx, b.Sy
  end,
  function(ls) return ls.basis(3), ls.basis { "g", "e" } end,
  function(ls) local E, U = ls.eigen(ls.spin(1).Sx) return E, U end,
  function(ls)
    local o = ls.oscillator(6)
    return ls.perturb(o.number + 0.5, o.x ^ 4, { order = 3 })
  end,
  function(ls)
    local s = ls.spin(1)
    return ls.perturb(s.Sz * s.Sz, 0.1 * s.Sx, { order = 2 })
  end,
  function(ls)
    local H0 = ls.matrix { { 0, 0, 0 }, { 0, 0, 0 }, { 0, 0, 5 } }
    local V = ls.matrix { { 0, 0, 1 }, { 0, 0, 1 }, { 1, 1, 0 } }
    return ls.effective(H0, V, { levels = { 1, 2 }, order = 2 })
  end,
  function(ls)
    return ls.sweep { H0 = ls.matrix { { 0, 0.1 }, { 0.1, 0 } }, V = ls.matrix { { 1, 0 }, { 0, -1 } },
      from = -1, to = 1, steps = 8 }
  end,
  function(ls)
    local g = ls.pulse.gaussian { amplitude = 0.1, center = 0, width = 1 }
    local s = ls.spin(0.5)
    return g, ls.transition { H0 = s.Sz, V = s.Sx, pulse = g, from = 1, t0 = -4, t1 = 4, steps = 64 }
  end,
  function(ls) return ls.pulse.square { amplitude = 0.2, start = 0, stop = 1 } end,
  function(ls) return ls.pulse.sine { amplitude = 0.2, omega = 1 } end,
  function(ls) return ls.pulse.ramp { from = 0, to = 1, start = 0, stop = 1 } end,
  function(ls)
    local out = {}
    for _, name in ipairs(ls.recipes and ls.recipes.list and ls.recipes.list() or {}) do
      local ok, m = pcall(ls.recipe, type(name) == "table" and name.name or name)
      if ok and type(m) == "table" then
        out[#out + 1] = m
        for _, k in ipairs(sorted_keys(m)) do
          if type(m[k]) == "userdata" then out[#out + 1] = m[k] end
        end
      end
    end
    return table.unpack(out)
  end,
  function(ls) -- a box for B:potential's callback paths, a rotor's operators
    local bx, rt = ls.box(3), ls.rotor(1)
    return bx, rt, bx.x, rt.cos
  end,
  function(ls) local c = ls.charge(3) return c, c.cos, c.sin end,
  -- @@FEATURE-FUZZ-SEEDS@@ (one constructor per new object type, above this line)
}
H.SEEDS = SEEDS

-- Valid calls of the main constructors, by path: the fuzz mutates one or two
-- arguments or option fields of these with hostile values, so the code past
-- the argument checks runs too. Missing functions are skipped.
local TEMPLATES = {
  ["ls.eigen"] = function(ls) return { ls.matrix { { 1.3, 0.4 }, { 0.4, -0.7 } }, { count = 2 } } end,
  ["ls.perturb"] = function(ls)
    local o = ls.oscillator(5)
    return { o.number + 0.5, o.x ^ 2, { order = 3, levels = { 1, 2 } } }
  end,
  ["ls.effective"] = function(ls)
    return { ls.matrix { { 0, 0, 0 }, { 0, 0, 0 }, { 0, 0, 5 } }, ls.matrix { { 0, 0, 1 }, { 0, 0, 1 }, { 1, 1, 0 } },
      { levels = { 1, 2 }, order = 2 } }
  end,
  ["ls.sweep"] = function(ls)
    return { { H0 = ls.matrix { { 0, 0.1 }, { 0.1, 0 } }, V = ls.matrix { { 1, 0 }, { 0, -1 } }, from = -1, to = 1,
      steps = 6 } }
  end,
  ["ls.transition"] = function(ls)
    local s = ls.spin(0.5)
    return { { H0 = s.Sz, V = s.Sx, pulse = ls.pulse.gaussian { amplitude = 0.1, center = 0, width = 1 }, from = 1,
      t0 = -3, t1 = 3, steps = 32 } }
  end,
  ["ls.pulse.gaussian"] = function() return { { amplitude = 0.1, center = 0, width = 1 } } end,
  ["ls.pulse.square"] = function() return { { amplitude = 0.2, start = 0, stop = 1 } } end,
  ["ls.pulse.sine"] = function() return { { amplitude = 0.2, omega = 1 } } end,
  ["ls.pulse.ramp"] = function() return { { from = 0, to = 1, start = 0, stop = 1 } } end,
  ["ls.golden_rule"] = function() return { { V = 0.01, band = { 0, 0.1, 0.2, 0.3 }, E = 0.15, broadening = 0.1 } } end,
  ["ls.clebsch"] = function() return { 1, 0, 1, 0, 1, 0 } end,
  ["ls.wigner3j"] = function() return { 1, 1, 1, 0, 0, 0 } end,
  ["ls.units.convert"] = function() return { 1, "eV", "hartree" } end,
  ["ls.recipe"] = function() return { "linear_force", { levels = 6 } } end,
  ["ls.sum"] = function(ls) return { 1, 3, function(i) return i * ls.spin(0.5).Sz end } end,
  ["ls.perturb_solve"] = function(ls)
    local o = ls.oscillator(8)
    return { o.number + 0.5, o.x, { order = 2, levels = { 1 } } }
  end,
  ["ls.blocks"] = function(ls) return { ls.matrix { { 1, 0 }, { 0, 2 } } } end,
  ["ls.box"] = function() return { 4, { width = 1.5 } } end,
  ["ls.rotor"] = function() return { 2 } end,
  ["ls.charge"] = function() return { 3 } end,
  ["ls.polarizability"] = function(ls) local o = ls.oscillator(6) return { o.number, o.x, { level = 1, omega = 0.3 } } end,
  ["ls.magic_frequencies"] = function(ls)
    local o = ls.oscillator(6)
    return { o.number + 0.1 * o.x ^ 4, o.x, { levels = { 1, 2 }, to = 3, steps = 20 } }
  end,
  ["ls.oscillator"] = function() return { 4, { pad = 4 } } end,
  ["ls.product"] = function(ls) return { ls.spin(0.5), 2 } end,
  -- @@FEATURE-FUZZ-TEMPLATES@@ (a valid call per new constructor, above this line)
}
H.TEMPLATES = TEMPLATES

local OPS = {
  add = function(a, b) return a + b end, sub = function(a, b) return a - b end,
  mul = function(a, b) return a * b end, div = function(a, b) return a / b end,
  pow = function(a, b) return a ^ b end, mod = function(a, b) return a % b end,
  idiv = function(a, b) return a // b end, unm = function(a) return -a end,
  len = function(a) return #a end, concat = function(a, b) return a .. b end,
  eq = function(a, b) return a == b end, lt = function(a, b) return a < b end,
  le = function(a, b) return a <= b end, index = function(a, b) return a[b] end,
  newindex = function(a, b, c) a[b] = c end, call = function(a, b, c) return a(b, c) end,
  tostring = function(a) return tostring(a) end,
  close = function(a) local x <close> = a end,
}
local OPNAMES = sorted_keys(OPS)

--- H.new(ls, opts) -> fuzzer. opts: seed (integer), trace (function(line)),
-- slow (seconds; calls slower than this are reported), dense_cap (bytes).
function H.new(ls, opts)
  opts = opts or {}
  local F = { ls = ls, calls = 0, ok = 0, errors = 0, findings = {}, slow = {}, keys = {}, byname = {}, okname = {}, oom = 0 }
  local seed = opts.seed or 20261202
  math.randomseed(seed)
  local R = math.random
  local trace = opts.trace
  local slow_limit = opts.slow or 2.0
  local clock = ls.clock or os.clock
  local dense_cap = opts.dense_cap or (16 << 20)
  local default_cap = ls.config().dense_cap
  ls.config { dense_cap = dense_cap }

  -- ---- the call surface, found at run time ---------------------------------
  local funcs = {} -- { name=, path=, caller(ls, ...) }
  for _, k in ipairs(sorted_keys(ls)) do
    local v = ls[k]
    if not excluded(k) then
      if type(v) == "function" then
        funcs[#funcs + 1] = { name = k, path = "ls." .. k }
      elseif type(v) == "table" and k ~= "units" then
        for _, k2 in ipairs(sorted_keys(v)) do
          if type(v[k2]) == "function" and not excluded(k2) then
            funcs[#funcs + 1] = { name = k2, path = "ls." .. k .. "." .. k2 }
          end
        end
      end
    end
  end
  -- unit conversions are functions too, one level down
  if type(ls.units) == "table" then
    for _, k2 in ipairs(sorted_keys(ls.units)) do
      if type(ls.units[k2]) == "function" and not excluded(k2) then
        funcs[#funcs + 1] = { name = k2, path = "ls.units." .. k2 }
      end
    end
  end
  F.funcs = funcs

  -- candidate method names: every string key of every method table in reach
  local cand, seen = {}, {}
  local function add_names(t)
    if type(t) ~= "table" then return end
    for _, k in ipairs(sorted_keys(t)) do
      if not seen[k] and k:sub(1, 2) ~= "__" then
        seen[k] = true
        cand[#cand + 1] = k
      end
    end
  end
  local reg = debug and debug.getregistry and debug.getregistry() or {}
  local mts = {}
  for _, k in ipairs(sorted_keys(reg)) do
    if k:match("^levelshift%.") and type(reg[k]) == "table" then
      mts[#mts + 1] = k
      for _, f in ipairs(sorted_keys(reg[k])) do
        if type(reg[k][f]) == "table" then add_names(reg[k][f]) end
      end
    end
  end
  for _, k in ipairs(sorted_keys(ls)) do
    if k:match("^_.*methods$") then add_names(ls[k]) end
  end
  table.sort(cand)
  F.metatables = mts

  -- methods of one object, probed once per type name
  local methods_of = {}
  local function typename(v)
    local mt = getmetatable(v)
    return type(mt) == "table" and type(mt.__name) == "string" and mt.__name or type(v)
  end
  local function methods(obj)
    if type(obj) ~= "userdata" then return {} end -- model tables: see the head comment
    local tn = typename(obj)
    if methods_of[tn] then return methods_of[tn] end
    local list = {}
    for _, k in ipairs(cand) do
      local ok, f = pcall(function() return obj[k] end)
      if ok and type(f) == "function" and not excluded(k) then list[#list + 1] = k end
    end
    methods_of[tn] = list
    return list
  end
  F.methods = function(tn) return methods_of[tn] end

  -- ---- the pool of live objects ---------------------------------------------
  local pool, seeded = {}, {}
  local POOL_MAX = 48
  local function remember(v, depth)
    depth = depth or 0
    local t = type(v)
    if t == "userdata" then -- big objects make every later call slow: leave them out
      local ok, n = pcall(function() return v:dim() end)
      if ok and math.type(n) == "integer" and n > 400 then return end
    end
    if t == "userdata" or (t == "table" and depth == 0) then
      if #pool < POOL_MAX then pool[#pool + 1] = v else pool[R(POOL_MAX)] = v end
    end
    if t == "table" and depth == 0 then -- userdata inside, in a fixed order
      for i = 1, 8 do
        if type(rawget(v, i)) == "userdata" then remember(rawget(v, i), 1) end
      end
      local ok, keys = pcall(sorted_keys, v)
      for i = 1, ok and math.min(#keys, 8) or 0 do
        local x = rawget(v, keys[i])
        if type(x) == "userdata" then remember(x, 1) end
      end
    end
  end
  local function reseed()
    for _, s in ipairs(SEEDS) do
      local r = table.pack(pcall(s, ls))
      if r[1] then
        for i = 2, r.n do
          if r[i] ~= nil then
            remember(r[i])
            seeded[#seeded + 1] = r[i]
          end
        end
      end
    end
    if #seeded > 200 then seeded = {} end
  end
  reseed()
  for _, v in ipairs(pool) do methods(v) end

  -- ---- hostile values ----------------------------------------------------------
  local NUMS = { 0, 1, 2, 3, 4, 5, -1, -2, 0.5, 2.385, -0.0, 1e-300, 0 / 0, math.huge, -math.huge, 1e308,
    2 ^ 53, 2 ^ 63, 1e18, -1e18, math.maxinteger, math.mininteger, 2 ^ 31, 2 ^ 32 + 1, 1e6, 100, 1.5, 0.1 }
  local STRS = { "", "x", "1", "3.5", "nan", "levels", "order", "dense", "sparse", "avoided", ".csv", "\0",
    "%s%n%d", "../x", "oscillator", "spin", "linear_force", string.rep("a", 5000) }

  local gen
  local function learned_key()
    local keys = F.keys
    if #keys > 0 and R() < 0.8 then return keys[R(#keys)] end
    local base = { "order", "levels", "count", "from", "to", "steps", "H0", "V", "pulse", "t0", "t1", "window",
      "amplitude", "width", "center", "start", "stop", "omega", "pad", "vectors", "threads", "degen_tol" }
    return base[R(#base)]
  end
  local callbacks = {
    function() error(CB_MSG) end,
    function() error(CB_OBJ) end,
    function() return nil end,
    function() return 0 / 0 end,
    function() return "garbage" end,
    function() return {} end,
    function() return math.huge end,
    function(...) return ... end,
    function() return 1, 2, 3 end,
    function() return pool[R(#pool)] end,
    function() collectgarbage("collect") return 0.25 end,
    function() -- close something while the caller may be using it
      local v = pool[R(#pool)]
      if type(v) == "userdata" then pcall(function() local c <close> = v end) end
      return 0.5
    end,
    function() -- call a finalizer by hand on something that may be in use
      local v = pool[R(#pool)]
      local mt = type(v) == "userdata" and getmetatable(v)
      if type(mt) == "table" and type(mt.__gc) == "function" then pcall(mt.__gc, v) end
      return 0.75
    end,
    function() coroutine.yield(1) end,
    function(x) return x end,
    function() return gen(1) end,
  }
  local function hostile_table(depth)
    local r = R(15)
    if r == 1 then return {} end
    if r == 2 then return { 1, nil, 3 } end
    if r == 3 then -- rows, sometimes ragged
      local n = R(4)
      local t = {}
      for i = 1, n do
        t[i] = {}
        for j = 1, (R() < 0.8 and n or R(5)) do t[i][j] = (R() < 0.9) and NUMS[R(12)] or gen(depth + 1) end
      end
      return t
    end
    if r == 4 then return setmetatable({}, { __index = function() error(CB_MSG) end }) end
    if r == 5 then return setmetatable({}, { __len = function() return 2 ^ 62 end }) end
    if r == 6 then return setmetatable({ 1, 2 }, { __len = function() error(CB_MSG) end }) end
    if r == 7 then return setmetatable({}, { __pairs = function() error(CB_MSG) end }) end
    if r == 8 then local t = {} t[1] = t return t end
    if r == 9 then return { [1.5] = 1, [true] = 2, x = 3 } end
    if r == 10 then return { n = 2 ^ 62, 1, 2 } end
    if r == 11 then -- reading a field closes a pool object first
      return setmetatable({}, { __index = function()
        local v = pool[R(#pool)]
        if type(v) == "userdata" then pcall(function() local c <close> = v end) end
        return nil
      end })
    end
    -- an options-like table with learned keys
    local t = {}
    for _ = 1, R(4) do t[learned_key()] = gen(depth + 1) end
    return t
  end
  gen = function(depth)
    depth = depth or 0
    local r = R(100)
    if r <= 6 then return nil end
    if r <= 8 then return R() < 0.5 end
    if r <= 35 then return NUMS[R(#NUMS)] end
    if r <= 41 then return STRS[R(#STRS)] end
    if r <= 70 and #pool > 0 then return pool[R(#pool)] end
    if r <= 76 then return callbacks[R(#callbacks)] end
    if r <= 77 then return coroutine.create(function() end) end
    if depth > 2 then return NUMS[R(#NUMS)] end
    return hostile_table(depth)
  end
  F.gen = gen

  -- ---- callers compiled per name and arity, so errors can name the function ----
  local compiled = {}
  local function caller(kind, path, n)
    local key = kind .. path .. n
    if compiled[key] then return compiled[key] end
    local params = {}
    for i = 1, n do params[i] = "a" .. i end
    local plist = table.concat(params, ", ")
    local src
    if kind == "f" then
      src = "local ls" .. (n > 0 and ", " or "") .. plist .. " = ...; return " .. path .. "(" .. plist .. ")"
    else
      src = "local o" .. (n > 0 and ", " or "") .. plist .. " = ...; return o:" .. path .. "(" .. plist .. ")"
    end
    compiled[key] = assert(load(src, "=fuzz"))
    return compiled[key]
  end

  -- findings are grouped by function and message shape; the first example is kept
  local function finding(kind, key, what, msg)
    local shape = tostring(msg):gsub("0x%x+", "ADDR"):gsub("'[^']*'", "'_'"):gsub("%d+", "N"):sub(1, 120)
    local id = kind .. " | " .. key .. " | " .. shape
    local f = F.findings[id]
    if not f then
      f = { kind = kind, key = key, what = what, msg = tostring(msg), count = 0 }
      F.findings[id] = f
    end
    f.count = f.count + 1
  end

  -- learn option names from "unknown option 'x' (accepted: a b c)"
  local kseen = {}
  local function learn(msg)
    local acc = msg:match("accepted:([^%)]*)%)")
    if acc then
      for k in acc:gmatch("[%w_]+") do
        if not kseen[k] and not WRITER_KEYS[k] then
          kseen[k] = true
          F.keys[#F.keys + 1] = k
          table.sort(F.keys)
        end
      end
    end
  end

  local function check(ok, e, name, key, what, is_op)
    if ok then
      F.ok = F.ok + 1
      return
    end
    F.errors = F.errors + 1
    if e == CB_OBJ then return end
    if type(e) ~= "string" then
      finding("non-string error", key, what, type(e))
      return
    end
    learn(e)
    if e:find("out of memory", 1, true) then F.oom = F.oom + 1 end
    if e:find(CB_MSG, 1, true) or e:find("attempt to yield", 1, true) then return end
    if e == "not enough memory" then -- Lua's own, under a host's memory cap
      F.oom = F.oom + 1
      return
    end
    if is_op then return end
    -- a Lua-side method on a closed object: the C method it calls first
    -- reports the closed self under its own name (known limitation, accepted)
    if e:find("on bad self (attempt to use a closed", 1, true) or
       e:find("on bad self (attempt to use a freed", 1, true) then return end
    if not e:find(name, 1, true) and not (ALIASES[key] and e:find(ALIASES[key], 1, true)) then finding("error does not name the function", key, what, e) end
  end

  local function args(n)
    local a = {}
    for i = 1, n do a[i] = (R() < 0.35) and R(1, 3) or gen(0) end -- small indices half the time
    return a
  end

  local function timed(key, what, f, ...)
    if trace then trace(what) end
    local t0 = clock()
    local r
    if R(25) == 1 then -- inside a coroutine: callbacks that yield meet a C boundary
      local co = coroutine.create(function(...) return pcall(f, ...) end)
      r = table.pack(coroutine.resume(co, ...))
      if r[1] and coroutine.status(co) == "dead" then
        table.remove(r, 1)
        r.n = r.n - 1
      else
        r = { true, n = 1 } -- suspended by a yield from Lua code: abandoned
      end
    else
      r = table.pack(pcall(f, ...))
    end
    local dt = clock() - t0
    if dt > slow_limit then F.slow[#F.slow + 1] = string.format("%.2f s  %s", dt, what) end
    F.byname[key] = (F.byname[key] or 0) + 1
    if r[1] then F.okname[key] = (F.okname[key] or 0) + 1 end
    return r
  end

  local function describe(v)
    local t = type(v)
    if t == "number" then return string.format("%.17g", v) end
    if t == "string" then return #v > 20 and ("string(" .. #v .. ")") or string.format("%q", v) end
    if t == "userdata" or t == "table" then return typename(v) end
    return t
  end
  local function arglist(a, n)
    local s = {}
    for i = 1, n do s[i] = describe(a[i]) end
    return table.concat(s, ", ")
  end

  -- a valid call of path with one or two arguments or option fields mutated
  local tpaths = {}
  for _, f in ipairs(funcs) do
    if TEMPLATES[f.path] then tpaths[#tpaths + 1] = f end
  end
  local function mutated(path)
    local ok, a = pcall(TEMPLATES[path], ls)
    if not ok or type(a) ~= "table" then return nil end
    local n = #a
    for _ = 1, R(0, 2) do
      local i = R(n + 1)
      if i <= n and type(a[i]) == "table" and getmetatable(a[i]) == nil and R() < 0.7 then
        local keys = sorted_keys(a[i])
        if #keys > 0 and R() < 0.6 then a[i][keys[R(#keys)]] = gen(1) -- spoil a field (nil drops it)
        else a[i][learned_key()] = gen(1) end                         -- or add one
      elseif i <= n then
        a[i] = gen(0)
      else
        a[i] = gen(0) -- one argument too many
        n = i
      end
    end
    return a, n
  end

  -- one random call
  function F.step()
    F.calls = F.calls + 1
    local c = F.calls
    if c % 97 == 0 then collectgarbage("collect") end
    if c % 500 == 0 or #pool < 8 then reseed() end
    local r = R(100)
    local n = R(0, 4)
    local a = args(n)
    local res
    if r <= 20 and #tpaths > 0 then
      local f = tpaths[R(#tpaths)]
      local ta, tn = mutated(f.path)
      if ta then a, n = ta, tn end
      local what = f.path .. "(" .. arglist(a, n) .. ")"
      res = timed(f.path, what, caller("f", f.path, n), ls, table.unpack(a, 1, n))
      check(res[1], res[2], f.name, f.path, what)
    elseif r <= 45 then
      local f = funcs[R(#funcs)]
      local what = f.path .. "(" .. arglist(a, n) .. ")"
      res = timed(f.path, what, caller("f", f.path, n), ls, table.unpack(a, 1, n))
      if f.name == "config" then ls.config { dense_cap = dense_cap } end
      check(res[1], res[2], f.name, f.path, what)
    elseif r <= 88 and #pool > 0 then
      local obj = pool[R(#pool)]
      local ms = methods(obj)
      if R(20) == 1 and type(obj) == "userdata" then -- a method of some other type, on this object
        local other = pool[R(#pool)]
        ms = methods(other)
      end
      if #ms == 0 then return end
      local m = ms[R(#ms)]
      local what = typename(obj) .. ":" .. m .. "(" .. arglist(a, n) .. ")"
      local ok, f = pcall(function() return obj[m] end)
      if not ok or type(f) ~= "function" then
        res = timed(typename(obj) .. ":" .. m, what, function() return obj[m](obj) end)
        check(res[1], res[2], m, typename(obj) .. ":" .. m, what, true)
      else
        res = timed(typename(obj) .. ":" .. m, what, caller("m", m, n), obj, table.unpack(a, 1, n))
        check(res[1], res[2], m, typename(obj) .. ":" .. m, what)
      end
    else
      local op = OPNAMES[R(#OPNAMES)]
      local x = #pool > 0 and pool[R(#pool)] or gen(0)
      if R() < 0.5 then a[1], x = x, a[1] or gen(0) end
      local what = op .. "(" .. describe(a[1]) .. ", " .. describe(x) .. ")"
      local lhs = a[1] == nil and pool[R(#pool)] or a[1]
      res = timed("op " .. op, what, OPS[op], lhs, x, a[2])
      check(res[1], res[2], op, "op " .. op, what, true)
    end
    if res and res[1] then
      for i = 2, math.min(res.n, 4) do remember(res[i]) end
    end
  end

  function F.run(n)
    local p, w = print, io and io.write -- (a sandboxed host has no io)
    print = function() end
    if io then io.write = function() return io.stdout end end
    local ok, e = pcall(function()
      for _ = 1, n do F.step() end
    end)
    print = p
    if io then io.write = w end
    if not ok then error(e, 0) end
    return F
  end

  function F.finish()
    pool, seeded = {}, {}
    collectgarbage("collect")
    ls.config { dense_cap = default_cap }
  end

  --- F.report() -> list of lines: findings, then the slowest calls
  function F.report()
    local lines = {}
    for _, k in ipairs(sorted_keys(F.findings)) do
      local f = F.findings[k]
      lines[#lines + 1] = string.format("%5d x %s: %s\n        e.g. %s -> %s", f.count, f.kind, f.key, f.what,
        f.msg:gsub("\n.*", " ..."):sub(1, 200))
    end
    for _, s in ipairs(F.slow) do lines[#lines + 1] = "slow: " .. s end
    return lines
  end

  return F
end

return H
