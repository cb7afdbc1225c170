--- levelshift: perturbation theory for quantum levels.
-- This file loads the C part (levelshift.core) and adds the Lua-side sugar.
-- Everything here uses only the module's public functions.
local core = require "levelshift.core"

local ls = {}
for k, v in pairs(core) do ls[k] = v end
ls._VERSION = "levelshift " .. core.version()

local matrix_methods = core._matrix_methods
local basis_methods = core._basis_methods

local sum_terms = core._sum_terms
local is_site_sum = core._is_site_sum
local complex_mt = getmetatable(core.I)
local function is_op(x) -- a levelshift.matrix (open or closed)
  local mt = type(x) == "userdata" and getmetatable(x)
  return mt and mt.__index == matrix_methods
end

-- acc + term as a pairwise sum, or the error of ls.sum naming term i (level:
-- that of ls.sum's caller, seen from add_term)
local function add_term(acc, term, i, level)
  local ok, r = pcall(function() return acc + term end)
  if not ok then error("sum: cannot add term " .. i .. " (" .. tostring(r):gsub("^[^\n]-:%d+: ", "") .. ")", level) end
  return r
end

--- ls.sum(first, last, f): the sum of f(i) for i = first..last (ops or numbers).
-- Once the total is an op, ops and scalars are collected and merged in one
-- pass (core._sum_terms: one merge instead of a copy of the total per term);
-- a batch is merged when its terms hold as many entries as the total, so
-- memory stays near terms + result. A batch that fails is redone pairwise,
-- which gives the same error as adding its terms one by one.
function ls.sum(first, last, f)
  if math.type(first) ~= "integer" then error("bad argument #1 to 'sum' (integer expected)", 2) end
  if math.type(last) ~= "integer" then error("bad argument #2 to 'sum' (integer expected)", 2) end
  if type(f) ~= "function" then error("bad argument #3 to 'sum' (function expected)", 2) end
  if last > first and (last - first < 0 or last - first >= 1 << 31) then -- (the difference may overflow)
    error("bad argument #2 to 'sum' (the range " .. first .. ".." .. last .. " has more than 2^31 terms)", 2)
  end
  local acc
  -- batch[1] is acc, batch[k] the term f(at[k]); held: entries of the terms
  -- (a scalar counts as the identity), budget: entries of acc
  local batch, at, nb, held, budget, dim = {}, {}, 0, 0, 0, 0
  -- terms that are site sums (ops of a large product basis not yet written
  -- out), and scalars after them, are collected and summed as terms: the
  -- total is written out once, when something needs its entries
  local sites, sat
  local function flush_sites()
    local r = sites[1]
    if #sites > 1 then
      local ok
      ok, r = pcall(sum_terms, sites)
      if not ok then
        r = sites[1]
        for k = 2, #sites do r = add_term(r, sites[k], sat[k], 4) end
      end
    end
    sites, sat = nil, nil
    return r
  end
  local function merge()
    if nb == 0 then return end
    local ok, r = pcall(sum_terms, batch)
    if ok then
      acc = r
    else
      for k = 2, nb + 1 do acc = add_term(acc, batch[k], at[k], 4) end
    end
    batch, at, nb, held = {}, {}, 0, 0
    local _, cnt = acc:storage()
    budget = cnt
  end
  for i = first, last do
    local term = f(i)
    if term ~= nil and acc == nil and not sites and is_site_sum(term) then
      sites, sat = { term }, { i }
    elseif term ~= nil and sites and (is_site_sum(term) or math.type(term) or getmetatable(term) == complex_mt) then
      sites[#sites + 1], sat[#sat + 1] = term, i
    elseif term ~= nil then
      if sites then acc = flush_sites() end
      if acc == nil then
        acc = term
      elseif is_op(acc) and (is_op(term) or math.type(term) or getmetatable(term) == complex_mt) then
        if nb == 0 then
          batch[1] = acc
          if budget == 0 then
            local ok, _, cnt = pcall(acc.storage, acc)
            budget = ok and cnt or 0
            ok, dim = pcall(acc.dim, acc)
            if not ok then dim = 0 end
          end
        end
        nb = nb + 1
        batch[nb + 1], at[nb + 1] = term, i
        if is_op(term) then
          local ok, _, cnt = pcall(term.storage, term)
          held = held + (ok and cnt or 0)
        else
          held = held + dim
        end
        if held >= budget then merge() end
      else
        merge()
        acc = add_term(acc, term, i, 3)
        budget = 0
      end
    end
  end
  if sites then acc = flush_sites() end
  merge()
  if acc == nil then error("sum: empty range " .. first .. ".." .. last .. " (no terms)", 2) end
  -- the terms' temporaries (site operators, products, scaled copies) are
  -- dead now and hold several times the result's memory; the collector
  -- sees the core's bytes only through its steps, so it would free them
  -- late, and the next large operator would grow the heap instead of
  -- reusing them (a 16-site chain: 50 MB held after a 9 MB bond sum)
  if is_op(acc) and not is_site_sum(acc) then
    local ok, _, cnt = pcall(acc.storage, acc)
    if ok and cnt and cnt >= (1 << 18) then collectgarbage() end
  end
  return acc
end

--- Format a label value: half-integers as "3/2".
function ls.format_label(v)
  if type(v) ~= "number" then return tostring(v) end
  if v ~= v or math.abs(v) >= 2 ^ 62 then return string.format("%g", v) end -- NaN, inf, huge
  if v == math.floor(v) then return string.format("%d", v) end
  if 2 * v == math.floor(2 * v) then return string.format("%d/2", math.floor(2 * v)) end
  return string.format("%g", v)
end

-- Re-raise the error of a C method called by a sugar method under the sugar's
-- name (the sugar passes its arguments on in the same positions).
local function sugar_error(fname, e)
  e = tostring(e):gsub("^[^\n]-:%d+: ", "")
  e = e:gsub("^bad argument (#%d+) to '[^']*'", "bad argument %1 to '" .. fname .. "'")
  e = e:gsub("^calling '[^']*' on bad self", "calling '" .. fname .. "' on bad self")
  if not e:find(fname, 1, true) then e = fname .. ": " .. e end
  error(e, 3)
end

--- B:describe(i) -> "n=3" or "m1=1/2 m2=-1/2" (or the state's name).
function basis_methods.describe(B, i)
  local ok, s = pcall(function() return B:labels(i) end)
  if not ok then sugar_error("describe", s) end
  if s.name then return s.name end
  local parts = {}
  for k, name in ipairs(B:label_names()) do
    parts[#parts + 1] = name .. "=" .. ls.format_label(s[k])
  end
  return table.concat(parts, " ")
end

--- m:totable() -> rows of numbers (real) or {re, im} pairs (complex).
function matrix_methods.totable(m)
  local ok, r, c = pcall(function() return m:dim() end)
  if not ok then sugar_error("totable", r) end
  local cplx = m:is_complex()
  local t = {}
  for i = 1, r do
    local row = {}
    for j = 1, c do
      local re, im = m:get(i, j)
      row[j] = cplx and { re, im } or re
    end
    t[i] = row
  end
  return t
end

--- m:column(j) -> Lua array of the real parts of column j (vectors)
function matrix_methods.column(m, j)
  local ok, r, c = pcall(function() return m:dim() end)
  if not ok then sugar_error("column", r) end
  if math.type(j) ~= "integer" or j < 1 or j > c then
    error("bad argument #1 to 'column' (column index must be an integer from 1 to " .. c .. ")", 2)
  end
  local t = {}
  for i = 1, r do t[i] = (m:get(i, j)) end
  return t
end

-- @@FEATURE-SUGAR@@ (feature modules are required below this line)
-- The sugar modules load on first use (start-up of `levelshift -e ''` is
-- measured in bench/run.py): touching one of a module's keys loads it;
-- pairs(ls) loads them all first, so listings stay complete.
local lazy = {
  sweep = function() require("levelshift.sweep")(ls, core) end,
  perturb = function() require("levelshift.series")(ls, core) end,
  recipe = function() require("levelshift.recipes").attach(ls) end,
  units = function() rawset(ls, "units", require("levelshift.units")) end,
  spin_model = function() require("levelshift.spinterms")(ls) end,
  force_field = function() require("levelshift.modes")(ls) end,
  floquet = function() require("levelshift.floquet")(ls) end,
}
lazy.have_gnuplot, lazy.recipes = lazy.sweep, lazy.recipe
lazy.light_shift = lazy.floquet
local loaded = {}
local function load(k)
  local f = lazy[k]
  if f and not loaded[f] then
    loaded[f] = true
    f()
  end
end
for k in pairs(lazy) do ls[k] = nil end
setmetatable(ls, {
  __index = function(t, k)
    if lazy[k] == nil then return nil end
    load(k)
    local v = rawget(t, k)
    if v == nil then v = core[k] end
    return v
  end,
  __pairs = function(t)
    for k in pairs(lazy) do
      load(k)
      if rawget(t, k) == nil and core[k] ~= nil then rawset(t, k, core[k]) end
    end
    return next, t, nil
  end,
})

--- Recipes by name (used by the program: levelshift RECIPE name=value ...).
function ls._run_recipe(name, params)
  local ok, recipes = pcall(require, "levelshift.recipes")
  if not ok then error("no recipe library found: " .. tostring(recipes), 0) end
  return recipes.run(name, params)
end

return ls
