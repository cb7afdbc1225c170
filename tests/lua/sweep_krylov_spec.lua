-- Sweeps on the Krylov path (ARPACK per point on a sparse H(p), warm starts
-- inside fixed runs of points): levels against closed forms and against the
-- dense path, the choice of path, threads, shards and resume.
local ls = require "levelshift"

local function chain(L)
  return ls.product(ls.spin(1 / 2), L)
end

-- open XX chain J sum (SxSx + SySy) and the uniform field sum Sz
local function xx_model(L, J)
  local P = chain(L)
  local H0 = ls.sum(1, L - 1, function(i)
    local a, b = P:site(i), P:site(i + 1)
    return J * (a.Sx * b.Sx + a.Sy * b.Sy)
  end)
  return H0, ls.sum(1, L, function(i) return P:site(i).Sz end)
end

-- every level of the XX chain in a field, E = sum over occupied k of
-- (J cos(k pi/(L+1)) + p) - p L/2 (Jordan-Wigner free fermions; source:
-- Lieb, Schultz, Mattis, Ann. Phys. 16, 407 (1961), open chain), as
-- {e = p-independent part, m = slope}: each level is linear in p
local function xx_levels(L, J)
  local out = {}
  for mask = 0, (1 << L) - 1 do
    local e, nocc = 0, 0
    for k = 1, L do
      if mask & (1 << (k - 1)) ~= 0 then
        e = e + J * math.cos(k * math.pi / (L + 1))
        nocc = nocc + 1
      end
    end
    out[#out + 1] = { e = e, m = nocc - L / 2 }
  end
  return out
end

local function lowest(levels, p, count)
  local e = {}
  for i, l in ipairs(levels) do e[i] = l.e + p * l.m end
  table.sort(e)
  local r = {}
  for i = 1, count do r[i] = e[i] end
  return r
end

local function ranked(sw, k)
  local e = {}
  for a = 1, sw.count do e[a] = sw:level(a)[k] end
  table.sort(e)
  return e
end

local function heisenberg(L, field)
  local P = chain(L)
  local H0 = ls.sum(1, L - 1, function(i)
    local a, b = P:site(i), P:site(i + 1)
    return a.Sx * b.Sx + a.Sy * b.Sy + a.Sz * b.Sz
  end)
  return H0, ls.sum(1, L, function(i) return P:site(i)[field] end)
end

local function tmpname(suffix)
  local base = os.tmpname()
  os.remove(base)
  return base .. suffix
end

local function slurp(path)
  local f = io.open(path, "rb"); if not f then return nil end
  local t = f:read("a"); f:close(); return t
end

describe("sweep on the Krylov path", function()
  it("follows every level of the XX chain in a field, true crossings between Sz sectors kept", function()
    local L, J = 10, 1.3
    local H0, V = xx_model(L, J)
    local steps, from, to = 34, -0.9, 0.8
    local sw = ls.sweep{H0 = H0, V = V, from = from, to = to, steps = steps, count = 4,
                        method = "krylov", progress = false}
    assert.are.equal("krylov", sw.method)
    local levels = xx_levels(L, J)
    local p = sw.p
    for k = 1, steps + 1 do
      local want, got = lowest(levels, p[k], 4), ranked(sw, k)
      for r = 1, 4 do assert.near(want[r], got[r], 1e-9) end
    end
    -- crossings: the interior local minima of adjacent gaps on the grid (sweep.c), each
    -- refined; with the closed-form energies on the same grid the same minima are found,
    -- and every one is a true crossing (levels of different Sz never mix): at the refined
    -- p the closed-form spectrum has the two adjacent levels equal
    local expect = 0
    for k = 2, steps do
      local a, b, c = lowest(levels, p[k - 1], 4), lowest(levels, p[k], 4), lowest(levels, p[k + 1], 4)
      for r = 1, 3 do
        local g0, g1, g2 = a[r + 1] - a[r], b[r + 1] - b[r], c[r + 1] - c[r]
        if g1 < g0 - 1e-11 and g1 <= g2 + 1e-11 then expect = expect + 1 end
      end
    end
    local cr = sw:crossings()
    assert.is_true(expect >= 3)
    assert.are.equal(expect, #cr)
    for _, c in ipairs(cr) do
      assert.are.equal("crossing", c.kind)
      local e = lowest(levels, c.at, 5)
      local g = math.huge
      for r = 1, 4 do g = math.min(g, e[r + 1] - e[r]) end
      assert.is_true(g < 1e-8, "closed-form gap " .. g .. " at p = " .. c.at)
    end
  end)

  it("agrees with the dense path on a Heisenberg chain, SU(2) multiplets at p = 0 included", function()
    -- at p = 0 the open spin-1/2 Heisenberg chain of even length has a singlet ground
    -- state and a triplet above it (Lieb and Mattis, J. Math. Phys. 3, 749 (1962)): levels
    -- 2-4 are one multiplet spread over the Sz = -1, 0, 1 sectors, and the Krylov path
    -- must return all three; the field sum Sx then splits it as E1 + M p (M = -1, 0, 1)
    local H0, V = heisenberg(10, "Sx")
    local opts = {H0 = H0, V = V, from = 0, to = 0.15, steps = 3, count = 4, progress = false}
    opts.method = "krylov"
    local kr = ls.sweep(opts)
    opts.method = "dense"
    local de = ls.sweep(opts)
    assert.are.equal("krylov", kr.method)
    assert.are.equal("dense", de.method)
    for k = 1, 4 do
      local a, b = ranked(kr, k), ranked(de, k)
      for r = 1, 4 do assert.near(b[r], a[r], 1e-10) end
    end
    local e0 = ranked(kr, 1)
    assert.near(e0[2], e0[4], 1e-10) -- the triplet, from three sectors
    assert.is_true(e0[2] - e0[1] > 0.1)
    local p2, e2 = kr.p[2], ranked(kr, 2) -- split linearly by the field
    assert.near(e0[2] - p2, e2[2], 1e-9)
    assert.near(e0[2], e2[3], 1e-9)
    assert.near(e0[2] + p2, e2[4], 1e-9)
  end)

  it("is chosen for a large sparse model, and not for a small, banded or wide request", function()
    -- the rule of levelshift.h (lvs_sweep_method): sparse, n > 200, 8 count <= n, not banded
    local H0, V = heisenberg(10, "Sz")
    local function path(h0, v, count)
      return ls.sweep{H0 = h0, V = v, from = 0, to = 0.1, steps = 1, count = count, progress = false}.method
    end
    assert.are.equal("krylov", path(H0, V, 4))
    assert.are.equal("dense", path(H0, V, 200))
    local h7, v7 = heisenberg(7, "Sz") -- 128 states
    assert.are.equal("dense", path(h7, v7, 4))
    local o = ls.oscillator(1200)
    assert.are.equal("band", path(o.number, o.x ^ 2, 4))
  end)

  it("gives the same numbers for 1 and 2 threads", function()
    -- runs of points are fixed by the grid, not by the thread count (levelshift.h)
    local H0, V = xx_model(8, 0.9)
    local function run(t)
      return ls.sweep{H0 = H0, V = V, from = -0.6, to = 0.5, steps = 40, count = 4, threads = t,
                      method = "krylov", progress = false}
    end
    local a, b = run(1), run(2)
    for l = 1, 4 do
      local x, y = a:level(l), b:level(l)
      for k = 1, 41 do assert.are.equal(x[k], y[k]) end
    end
    local ca, cb = a:crossings(), b:crossings()
    assert.are.equal(#ca, #cb)
    for i = 1, #ca do assert.are.equal(ca[i].at, cb[i].at) end
  end)

  it("resumes from a cut journal and joins shards into the bytes of one run", function()
    -- checkpoint/restart and merge equal one run byte for byte (common practice); the cut
    -- leaves a run half done, so a point starts from a predecessor read from the file
    local H0, V = xx_model(8, 0.9)
    local function run(o)
      local t = {H0 = H0, V = V, from = -0.6, to = 0.5, steps = 40, count = 4, method = "krylov",
                 progress = false, threads = 2}
      for k, v in pairs(o) do t[k] = v end
      return ls.sweep(t)
    end
    local ref, out = tmpname(".csv"), tmpname(".csv")
    run{out = ref}
    -- shard 1 of 2 takes the runs 0 and 2 (points 0-15 and 32-40), in order on one thread
    local sh = run{out = out, shard = "1/2", threads = 1}
    assert.is_true(sh.partial)
    assert.are.equal(25, sh.done)
    local part = out .. ".part.1-of-2"
    -- records of 8 (2 + count + n count) bytes: Sx Sx + Sy Sy is stored complex, but the
    -- Krylov path keeps a model with no imaginary part real
    local rec = 8 * (2 + 4 + 256 * 4)
    local bytes = slurp(part)
    assert.are.equal(48 + 25 * rec, #bytes)
    local f = assert(io.open(part, "wb"))
    f:write(bytes:sub(1, 48 + 20 * rec)) -- points 0-15 and 32-35 stay
    f:close()
    run{out = out}
    assert.are.equal(slurp(ref), slurp(out))
    assert.is_nil(slurp(part))
    -- two shards, then a merge
    run{out = out, shard = "2/2"}
    run{out = out, shard = "1/2"}
    local m = run{out = out, merge = true}
    assert.is_false(m.partial)
    assert.are.equal(slurp(ref), slurp(out))
    os.remove(ref); os.remove(out)
  end)

  it("refuses a journal of the dense path, and bad methods", function()
    local H0, V = xx_model(8, 0.9)
    local out = tmpname(".csv")
    local t = {H0 = H0, V = V, from = -0.6, to = 0.5, steps = 8, count = 4, progress = false, out = out,
               shard = "1/2", method = "dense"}
    ls.sweep(t)
    t.shard, t.method = nil, "krylov"
    assert.error_matches(function() ls.sweep(t) end, "belongs to another sweep", 1, true)
    os.remove(out .. ".part.1-of-2"); os.remove(out .. ".part")
    assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, method = "lanczos"} end,
      "option 'method' must be \"auto\", \"dense\", \"band\" or \"krylov\"", 1, true)
    assert.error_matches(function() ls.sweep{H = function(p) return H0 + p * V end, from = 0, to = 1,
      method = "krylov"} end, "method 'krylov' needs H0 and V", 1, true)
    local c = ls.matrix{{0, ls.I}, {-ls.I, 0}}
    assert.error_matches(function() ls.sweep{H0 = c, V = c, from = 0, to = 1, method = "band"} end,
      "method 'band' needs a real H0 and V of at least 16 states (got 2, complex)", 1, true)
  end)
end)
