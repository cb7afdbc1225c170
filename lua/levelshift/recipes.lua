--- levelshift.recipes: physical models by name (the recipe loader).
--
-- A recipe is a file recipes/NAME.lua returning a table
--   { about = "...", doc = [[...]], params = { {name=, default=, unit=, about=,
--     min=, max=, integer=, positive=, nonnegative=, half_integer=, choices=}, ... },
--     check = function(p) end (optional), build = function(ls, p) return {...} end }
-- (see /recipes/README.md and DEVELOPERS.md, "Adding a recipe").
--
-- ls.recipe(name [, params]) finds the file, checks every parameter against
-- its declaration, fills the defaults, calls build and returns the model with
-- name, params, about and doc added. The full Hamiltonian of every model is
-- H = H0 + V (the physical size of the perturbation is inside V), so
-- ls.perturb(m.H0, m.V), ls.effective(m.H0, m.V, ...) and ls.sweep{H0 = m.H0,
-- V = m.V, to = 1} all describe the model at its given parameters.
--
-- Where recipes are looked for, in order:
--   0. directories given to recipes.add_dir (last added first),
--   1. each directory in the environment variable LVS_RECIPES (separated by ';'),
--   2. <dir of this file>/recipes   (installed: share/lua/5.4/levelshift/recipes),
--   3. <dir of this file>/../../recipes   (the source tree: <repo>/recipes).
-- The first directory holding NAME.lua wins.
local M = {}

local NAME_PAT = "^[a-z][a-z0-9_]*$"
local ls_ref -- the levelshift module, set by attach()

local function get_ls()
  if not ls_ref then ls_ref = require "levelshift" end
  return ls_ref
end

-- directory holding this file, found without the debug library (absent in
-- sandboxed hosts): package.searchpath resolves our own module name
local function own_dir()
  local src
  if debug and debug.getinfo then
    local info = debug.getinfo(1, "S")
    if info and info.source and info.source:sub(1, 1) == "@" then src = info.source:sub(2) end
  end
  if not src and package and package.searchpath then
    src = package.searchpath("levelshift.recipes", package.path)
  end
  if not src then return nil end
  return src:match("^(.*)[/\\][^/\\]*$") or "."
end

local extra = {} -- directories added with recipes.add_dir, searched first

--- recipes.add_dir(dir): search `dir` for recipes before every other place
-- (a user's own recipe folder).
function M.add_dir(dir)
  if type(dir) ~= "string" or dir == "" then
    error("bad argument #1 to 'add_dir' (directory name expected, got " .. type(dir) .. ")", 2)
  end
  table.insert(extra, 1, dir)
end

--- recipes.dirs() -> the directories searched, in order (existing or not).
function M.dirs()
  local t = {}
  for _, d in ipairs(extra) do t[#t + 1] = d end
  local env = os and os.getenv and os.getenv("LVS_RECIPES")
  if env and env ~= "" then
    for d in env:gmatch("[^;]+") do t[#t + 1] = d end
  end
  local here = own_dir()
  if here then
    t[#t + 1] = here .. "/recipes"
    t[#t + 1] = here .. "/../../recipes"
  end
  return t
end

local function list_dir(dir)
  local core = get_ls()
  local f = core._recipe_files
  if not f then return {} end
  local names = f(dir)
  return names or {}
end

--- recipes.list() -> sorted array of the names of every recipe found.
function M.list()
  local seen, out = {}, {}
  for _, d in ipairs(M.dirs()) do
    for _, n in ipairs(list_dir(d)) do
      if not seen[n] then
        seen[n] = true
        out[#out + 1] = n
      end
    end
  end
  table.sort(out)
  return out
end

local function known_text()
  local l = M.list()
  if #l == 0 then return "none found; searched " .. table.concat(M.dirs(), ", ") end
  return table.concat(l, ", ")
end

-- load a chunk from a file; in a sandboxed host loadfile is gone, and the
-- Lua-file searcher of `package` (still present) does the reading instead
local function load_path(path, dir, name)
  if loadfile then return loadfile(path, "t") end
  local saved = package.path
  package.path = dir .. "/?.lua"
  local ok, loader = pcall(package.searchers[2], name)
  package.path = saved
  if not ok then return nil, loader end
  if type(loader) ~= "function" then return nil, tostring(loader) end
  return function() return loader(name, path) end
end

local cache = {} -- path -> definition

local CHECK_KEYS = {
  name = true, default = true, unit = true, about = true, min = true, max = true,
  integer = true, positive = true, nonnegative = true, half_integer = true, choices = true,
  type = true,
  invented = true, -- the default is an invented illustration value (report and help say so)
}

-- the definition table of recipe `name`, validated once per file
local function definition(name)
  for _, dir in ipairs(M.dirs()) do
    local path = package.searchpath(name, dir .. "/?.lua")
    if path then
      if cache[path] then return cache[path] end
      local chunk, err = load_path(path, dir, name)
      -- "path:12: msg" becomes "line 12: msg" (the path is named once)
      local function at_line(m) return (tostring(m):gsub("^[^\n]-:(%d+): ", "line %1: ", 1)) end
      if not chunk then error("recipe '" .. name .. "': cannot load " .. path .. " (" .. at_line(err) .. ")", 0) end
      local ok, def = pcall(chunk)
      if not ok then error("recipe '" .. name .. "': error while loading " .. path .. " (" .. at_line(def) .. ")", 0) end
      local bad
      if type(def) ~= "table" then bad = "does not return a table"
      elseif type(def.build) ~= "function" then bad = "has no build function"
      elseif type(def.params) ~= "table" then bad = "has no params list"
      elseif def.check ~= nil and type(def.check) ~= "function" then bad = "has a check that is not a function"
      end
      if not bad then
        local seen = {}
        for i, pd in ipairs(def.params) do
          if type(pd) ~= "table" or type(pd.name) ~= "string" or not pd.name:match("^[%a_][%w_]*$") then
            bad = "parameter #" .. i .. " has no valid name"
            break
          end
          if seen[pd.name] then bad = "declares parameter '" .. pd.name .. "' twice"; break end
          seen[pd.name] = true
          for k in pairs(pd) do
            if not CHECK_KEYS[k] then bad = "parameter '" .. pd.name .. "' has an unknown field '" .. tostring(k) .. "'"; break end
          end
          if bad then break end
        end
      end
      if bad then error("recipe '" .. name .. "' (" .. path .. ") " .. bad, 0) end
      def.path = path
      cache[path] = def
      return def
    end
  end
  return nil
end

local function fmt(v)
  if type(v) == "number" then
    if math.type(v) == "integer" then return tostring(v) end
    return string.format("%.10g", v)
  end
  return tostring(v)
end

local function accepted(def)
  local t = {}
  for _, pd in ipairs(def.params) do t[#t + 1] = pd.name end
  return #t > 0 and table.concat(t, ", ") or "none"
end

-- expected Lua type of a parameter: declared `type`, else the default's type
local function ptype(pd)
  if pd.type then return pd.type end
  if pd.integer or pd.half_integer then return "number" end
  if pd.default ~= nil then return type(pd.default) end
  if pd.choices then return type(pd.choices[1]) end
  return "number"
end

-- check one value against its declaration; returns the (normalised) value
local function check_value(rname, pd, v)
  local function fail(what)
    error(string.format("recipe '%s': parameter '%s' %s (got %s)", rname, pd.name, what, fmt(v)), 0)
  end
  local want = ptype(pd)
  if want == "number" then
    if type(v) == "string" then
      local n = tonumber(v)
      if n == nil then fail("must be a number") end
      v = n
    end
    if type(v) ~= "number" then fail("must be a number") end
    if v ~= v or v == math.huge or v == -math.huge then fail("must be a finite number") end
    if pd.integer then
      if v ~= math.floor(v) then fail("must be an integer") end
      v = math.tointeger(v) or fail("must be an integer in range")
    end
    if pd.half_integer then
      if 2 * v ~= math.floor(2 * v) then fail("must be a multiple of 1/2") end
    end
    if pd.positive and not (v > 0) then
      fail(pd.half_integer and "must be a positive multiple of 1/2" or "must be positive")
    end
    if pd.nonnegative and v < 0 then fail("must not be negative") end
    if pd.min and v < pd.min then fail("must be at least " .. fmt(pd.min)) end
    if pd.max and v > pd.max then fail("must be at most " .. fmt(pd.max)) end
  elseif want == "boolean" then
    if v == "true" then v = true elseif v == "false" then v = false end
    if type(v) ~= "boolean" then fail("must be true or false") end
  elseif want == "string" then
    if type(v) == "number" then v = fmt(v) end
    if type(v) ~= "string" then fail("must be a string") end
  else
    if type(v) ~= want then fail("must be a " .. want) end
  end
  if pd.choices then
    local ok = false
    for _, c in ipairs(pd.choices) do if c == v then ok = true end end
    if not ok then
      local t = {}
      for _, c in ipairs(pd.choices) do t[#t + 1] = fmt(c) end
      fail("must be one of " .. table.concat(t, ", "))
    end
  end
  return v
end

-- strip "path:line: " that error() adds inside a recipe's check or build
local function clean(msg)
  if type(msg) ~= "string" then return tostring(msg) end
  return (msg:gsub("^[^\n]-%.lua:%d+: ", ""))
end

--- recipes.recipe(name [, params]) -> model (what ls.recipe calls).
function M.recipe(name, params)
  if type(name) ~= "string" then
    error("bad argument #1 to 'recipe' (recipe name expected, got " .. type(name) .. ")", 2)
  end
  if not name:match(NAME_PAT) then
    error("bad argument #1 to 'recipe' (unknown recipe '" .. name .. "'; known: " .. known_text() .. ")", 2)
  end
  if params ~= nil and type(params) ~= "table" then
    error("bad argument #2 to 'recipe' (parameter table expected, got " .. type(params) .. ")", 2)
  end
  local def = definition(name)
  if not def then
    error("bad argument #1 to 'recipe' (unknown recipe '" .. name .. "'; known: " .. known_text() .. ")", 2)
  end
  params = params or {}
  local decl = {}
  for _, pd in ipairs(def.params) do decl[pd.name] = pd end
  local unknown = {}
  for k in pairs(params) do
    if type(k) ~= "string" or not decl[k] then unknown[#unknown + 1] = tostring(k) end
  end
  if #unknown > 0 then
    table.sort(unknown)
    error(string.format("recipe '%s': unknown parameter%s '%s' (accepted: %s)", name,
      #unknown > 1 and "s" or "", table.concat(unknown, "', '"), accepted(def)), 2)
  end
  local p = {}
  for _, pd in ipairs(def.params) do
    local v = params[pd.name]
    if v == nil then
      v = pd.default
      if v == nil then
        error(string.format("recipe '%s': parameter '%s' is required (%s)", name, pd.name, pd.about or "no default"), 2)
      end
    end
    p[pd.name] = check_value(name, pd, v)
  end
  if def.check then
    local ok, err = pcall(def.check, p)
    if not ok then
      local msg = clean(err)
      if not msg:find("^recipe '") then msg = "recipe '" .. name .. "': " .. msg end
      error(msg, 2)
    end
  end
  local ok, model = pcall(def.build, get_ls(), p)
  if not ok then
    local msg = clean(model)
    if not msg:find("^recipe '") then msg = "recipe '" .. name .. "': " .. msg end
    error(msg, 2)
  end
  if type(model) ~= "table" or model.H0 == nil or model.V == nil then
    error("recipe '" .. name .. "': build did not return a model with H0 and V (recipe bug)", 2)
  end
  local copy = {}
  for k, v in pairs(p) do copy[k] = v end
  model.name, model.params, model.about, model.doc = name, copy, def.about, def.doc
  return model
end

--- recipes.info(name) -> the definition table (about, doc, params, path), or nil.
function M.info(name)
  if type(name) ~= "string" or not name:match(NAME_PAT) then return nil end
  return definition(name)
end

--- recipes.help(name) -> text: about, doc and the parameter table.
function M.help(name)
  local def = M.info(name)
  if not def then error("recipe: unknown recipe '" .. tostring(name) .. "' (known: " .. known_text() .. ")", 2) end
  local out = { name .. ": " .. (def.about or "") }
  if def.doc then out[#out + 1] = "\n" .. def.doc:gsub("^%s+", ""):gsub("%s+$", "") .. "\n" end
  out[#out + 1] = "parameters:"
  for _, pd in ipairs(def.params) do
    local checks = {}
    if pd.integer then checks[#checks + 1] = "integer" end
    if pd.half_integer then checks[#checks + 1] = "multiple of 1/2" end
    if pd.positive then checks[#checks + 1] = "> 0" end
    if pd.nonnegative then checks[#checks + 1] = ">= 0" end
    if pd.min then checks[#checks + 1] = ">= " .. fmt(pd.min) end
    if pd.max then checks[#checks + 1] = "<= " .. fmt(pd.max) end
    if pd.choices then
      local c = {}
      for _, x in ipairs(pd.choices) do c[#c + 1] = fmt(x) end
      checks[#checks + 1] = "one of " .. table.concat(c, "|")
    end
    out[#out + 1] = string.format("  %-16s default %-12s %-14s %s%s%s", pd.name,
      pd.default == nil and "(required)" or fmt(pd.default), pd.unit and ("[" .. pd.unit .. "]") or "",
      pd.about or "", #checks > 0 and ("  (" .. table.concat(checks, ", ") .. ")") or "",
      pd.invented and "  (default invented)" or "")
  end
  return table.concat(out, "\n")
end

-- the printed report of `levelshift NAME name=value ...`
-- above this many states the report skips the exact diagonalization
-- unless show_exact=true (the series itself stays cheap); a sparse H0 + V
-- goes to the Krylov path, which takes the lowest levels of far larger
-- models in well under a second
local EXACT_LIMIT = 2048
local EXACT_LIMIT_SPARSE = 1 << 18

local function report(m, show_levels, show_order, show_exact)
  local ls = get_ls()
  local w = io.write
  w(string.format("recipe %s: %s\n", m.name, m.about or ""))
  w("parameters:\n")
  local def = M.info(m.name)
  for _, pd in ipairs(def.params) do
    local inv = pd.invented and m.params[pd.name] == pd.default
    -- a unit given as the name of another parameter (energy_unit) shows its value
    local unit = pd.unit
    if unit and type(m.params[unit]) == "string" then unit = m.params[unit] end
    w(string.format("  %-16s = %-14s %s%s\n", pd.name, fmt(m.params[pd.name]), unit or "",
      inv and "  (invented)" or ""))
  end
  local n = m.H0:dim()
  local count = math.min(show_levels, n)
  if show_exact == nil then
    show_exact = n <= EXACT_LIMIT or (n <= EXACT_LIMIT_SPARSE and (m.H0 + m.V):storage() == "sparse")
  end
  w(string.format("H = H0 + V on %d states%s\n", n, m.units and (", energies in " .. m.units) or ""))
  local levels = {}
  for i = 1, count do levels[i] = i end
  local s, serr = nil, nil
  local ok, res = pcall(ls.perturb, m.H0, m.V, { order = show_order, levels = levels })
  if ok then s = res else serr = clean(res) end
  -- E[i]: the exact level series level i continues into (s:check pairs by
  -- the series states' overlaps and diagonalizes H0 + V once), so the
  -- columns stand side by side even where levels cross; paired = false:
  -- ascending exact levels (no series, or no states)
  local E, paired
  if show_exact and s then
    local okc, c = pcall(s.check, s, 1)
    if okc and c.pairing == "overlap" then
      E, paired = {}, true
      for _, r in ipairs(c.levels) do E[r.level] = r.exact end
    end
  end
  if show_exact and not paired then E = ls.eigen(m.H0 + m.V, { count = count, vectors = false }) end
  local E0
  if not s and show_exact then
    local ok0, r0 = pcall(ls.eigen, m.H0, { count = count, vectors = false })
    if ok0 then E0 = r0 end
  end
  local head = string.format("%5s  %16s", "level", "E0")
  for k = 1, show_order do head = head .. string.format("  %14s", "E" .. k) end
  head = head .. string.format("  %16s ", "sum to order " .. show_order)
  if E then head = head .. string.format("  %16s", "exact (H0+V)") end
  w(head .. "\n")
  -- corrections below rounding level of the energies print as 0
  local scale = 0
  for i = 1, count do
    local e0 = s and s:energy(i, 0) or (E0 and E0[i]) or 0
    if math.abs(e0) > scale then scale = math.abs(e0) end
  end
  local function clip(e) return math.abs(e) < 1e-13 * scale and 0.0 or e + 0.0 end
  local sums, shift = {}, 0
  for i = 1, count do
    local e0 = s and s:energy(i, 0) or (E0 and E0[i])
    local line = e0 and string.format("%5d  %16.10g", i, e0 + 0.0) -- + 0.0 turns -0 into 0
      or string.format("%5d  %16s", i, "-")
    local sum = 0
    if s then
      for k = 0, show_order do
        local e = s:energy(i, k)
        if k > 0 then line = line .. string.format("  %14.7g", clip(e)) end
      end
      -- s:at: the plain sum, or for a member of a model space of nearly
      -- degenerate levels the eigenvalue of its effective Hamiltonian
      sum = s:at(i, 1)
      line = line .. string.format("  %16.10g%s", sum + 0.0, s:info(i).model_space and "*" or " ")
      sums[#sums + 1] = sum
      if math.abs(sum - e0) > shift then shift = math.abs(sum - e0) end
    else
      for _ = 1, show_order do line = line .. string.format("  %14s", "-") end
      line = line .. string.format("  %16s", "-")
    end
    if E then line = line .. string.format("  %16.10g", E[i] + 0.0) end
    w(line .. "\n")
  end
  if serr then w("perturbation series not available: " .. serr .. "\n") end
  if s then
    for _, grp in ipairs(s:groups()) do
      if grp.kind == "near" then
        w(string.format("* levels %s are nearly degenerate (%s): their sums are the eigenvalues of the model space's " ..
          "order-%d effective Hamiltonian; E1..E%d are their plain series\n", table.concat(grp.members, ", "), grp.why,
          show_order, show_order))
      end
    end
  end
  if E and #sums == count and count > 0 then
    -- compare the sums with their exact levels (paired, or both ascending)
    local miss = 0
    if not paired then table.sort(sums) end
    for i = 1, count do miss = math.max(miss, math.abs(sums[i] - E[i])) end
    if miss > 1e-2 * shift and miss > 1e-9 * math.max(scale, 1e-300) then
      w(string.format("warning: the order-%d sums miss the exact levels by up to %.4g (%.0f%% of the largest shift): " ..
        "the perturbation is past the series' range here; trust the exact column, or lower the perturbation\n",
        show_order, miss, 100 * miss / math.max(shift, 1e-300)))
    end
  end
  if E then
    w(paired and "levels numbered by ascending E0; the exact column is the level each one continues into (by overlap)\n"
      or "levels numbered by ascending E0 (series) and by ascending exact energy (last column)\n")
  elseif n > EXACT_LIMIT then
    w(string.format("levels numbered by ascending E0; exact levels skipped above %d states (show_exact=true forces them)\n",
      EXACT_LIMIT))
  else
    w("levels numbered by ascending E0; exact levels skipped (show_exact=false)\n")
  end
end

--- recipes.run(name, params): what `levelshift NAME k=v ...` and
-- `levelshift --recipes` do (name "" lists the recipes). Besides the recipe's
-- own parameters it takes show_levels (default 6), show_order (default 2),
-- show_exact (default: only up to 2048 states) and help=true (print the
-- recipe's documentation instead).
function M.run(name, params)
  params = params or {}
  if type(params) ~= "table" then error("recipe run: parameters must be a table (got " .. type(params) .. ")", 0) end
  if name == nil or name == "" then
    local l = M.list()
    if #l == 0 then
      io.write("no recipes found; searched " .. table.concat(M.dirs(), ", ") .. "\n")
      return
    end
    for _, n in ipairs(l) do
      local ok, def = pcall(M.info, n)
      io.write(string.format("%-18s %s\n", n, ok and def and def.about or ("(cannot load: " .. tostring(def) .. ")")))
    end
    return
  end
  local p, opts = {}, { show_levels = 6, show_order = 2, help = false, show_exact = "auto" }
  for k, v in pairs(params) do
    if opts[k] ~= nil then opts[k] = v else p[k] = v end
  end
  if opts.help == true or opts.help == "true" then
    io.write(M.help(name) .. "\n")
    return
  end
  if math.type(opts.show_levels) ~= "integer" or opts.show_levels < 1 then
    error("recipe run: show_levels must be a positive integer (got " .. tostring(opts.show_levels) .. ")", 0)
  end
  if math.type(opts.show_order) ~= "integer" or opts.show_order < 1 or opts.show_order > 20 then
    error("recipe run: show_order must be an integer from 1 to 20 (got " .. tostring(opts.show_order) .. ")", 0)
  end
  local ok, m = pcall(M.recipe, name, p)
  if not ok then error(clean(m), 0) end
  local se = opts.show_exact
  if se ~= "auto" and type(se) ~= "boolean" then
    error("recipe run: show_exact must be true or false (got " .. tostring(se) .. ")", 0)
  end
  if se == "auto" then se = nil end
  report(m, opts.show_levels, opts.show_order, se)
  return m
end

--- ls.recipes._argint(fname, i, v, lo, hi) (internal): for the helper functions a recipe
-- hands out with its model (m.exact(level) ...): v must be an integer in
-- lo..hi, else a Lua error naming the function and the argument.
function M._argint(fname, i, v, lo, hi)
  if math.type(v) ~= "integer" and not (type(v) == "number" and v == math.floor(v) and v == v) then
    error(string.format("bad argument #%d to '%s' (integer expected, got %s)", i, fname,
      type(v) == "number" and tostring(v) or type(v)), 3)
  end
  if v < lo or (hi and v > hi) then
    error(string.format("bad argument #%d to '%s' (%s out of range %d..%s)", i, fname, tostring(v), lo,
      hi and string.format("%d", hi) or "inf"), 3)
  end
  return math.tointeger(v)
end

--- attach(ls): install ls.recipe and ls.recipes (called from init.lua).
function M.attach(ls)
  ls_ref = ls
  ls.recipe = M.recipe
  ls.recipes = M
end

return M
