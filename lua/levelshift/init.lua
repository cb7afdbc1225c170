--- levelshift: perturbation theory for quantum levels.
-- This file loads the C part (levelshift.core) and adds the Lua-side sugar.
-- Everything here uses only the module's public functions.
local core = require "levelshift.core"

local ls = {}
for k, v in pairs(core) do ls[k] = v end
ls._VERSION = "levelshift " .. core.version()

local matrix_methods = core._matrix_methods
local basis_methods = core._basis_methods

--- ls.sum(first, last, f): the sum of f(i) for i = first..last (ops or numbers).
function ls.sum(first, last, f)
  if math.type(first) ~= "integer" then error("bad argument #1 to 'sum' (integer expected)", 2) end
  if math.type(last) ~= "integer" then error("bad argument #2 to 'sum' (integer expected)", 2) end
  if type(f) ~= "function" then error("bad argument #3 to 'sum' (function expected)", 2) end
  local acc
  for i = first, last do
    local term = f(i)
    if term ~= nil then
      if acc == nil then acc = term else acc = acc + term end
    end
  end
  if acc == nil then error("sum: empty range " .. first .. ".." .. last .. " (no terms)", 2) end
  return acc
end

--- Format a label value: half-integers as "3/2".
function ls.format_label(v)
  if type(v) ~= "number" then return tostring(v) end
  if v == math.floor(v) then return string.format("%d", v) end
  if 2 * v == math.floor(2 * v) then return string.format("%d/2", math.floor(2 * v)) end
  return string.format("%g", v)
end

--- B:describe(i) -> "n=3" or "m1=1/2 m2=-1/2" (or the state's name).
function basis_methods.describe(B, i)
  local s = B:labels(i)
  if s.name then return s.name end
  local parts = {}
  for k, name in ipairs(B:label_names()) do
    parts[#parts + 1] = name .. "=" .. ls.format_label(s[k])
  end
  return table.concat(parts, " ")
end

--- m:totable() -> rows of numbers (real) or {re, im} pairs (complex).
function matrix_methods.totable(m)
  local r, c = m:dim()
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
  local r = m:dim()
  local t = {}
  for i = 1, r do t[i] = (m:get(i, j)) end
  return t
end

-- @@FEATURE-SUGAR@@ (feature modules are required below this line)
require("levelshift.sweep")(ls, core)
require("levelshift.series")(ls, core)
require("levelshift.recipes").attach(ls)
ls.units = require("levelshift.units")

--- Recipes by name (used by the program: levelshift RECIPE name=value ...).
function ls._run_recipe(name, params)
  local ok, recipes = pcall(require, "levelshift.recipes")
  if not ok then error("no recipe library found: " .. tostring(recipes), 0) end
  return recipes.run(name, params)
end

return ls
