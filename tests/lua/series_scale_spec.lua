-- The series does not depend on how a model is scaled or shifted:
-- rescaling V, adding a far level or a constant offset to H0 leaves the
-- coefficients as they must be (degenerate regrouping and the degeneracy
-- tolerance are relative to the right scales), and overflowed coefficients
-- are an error, not a NaN.
local ls = require "levelshift"

local function mk(n, f)
  local t = {}
  for i = 1, n do
    t[i] = {}
    for j = 1, n do t[i][j] = f(i, j) end
  end
  return ls.matrix(t)
end
local function D(v) return mk(#v, function(i, j) return i == j and v[i] or 0 end) end

-- worst |E_k(a) - f^k E_k(b)| over levels, relative to the largest |f^k E_k(b)|
-- of that order (coefficients that vanish exactly, e.g. stretched states,
-- are judged on their order's scale)
local function scaled_gap(sa, sb, n, K, f)
  local worst = 0
  for k = 1, K do
    local sc = 0
    for lev = 1, n do sc = math.max(sc, math.abs(sb:energy(lev, k) * f ^ k)) end
    for lev = 1, n do
      local d = math.abs(sa:energy(lev, k) - sb:energy(lev, k) * f ^ k)
      worst = math.max(worst, sc > 0 and d / sc or d)
    end
  end
  return worst
end

describe("series scaling", function()
  -- H0 + lambda (c V) = H0 + (c lambda) V, so E_k(c V) = c^k E_k(V) for
  -- every k (the series is the Taylor series in lambda; common practice).
  -- A doubly degenerate level beside a single one: the regrouping of the
  -- degenerate pair must not merge its first-order values at high order
  -- (it did once: E(1) = 0 from order 32 at c = 2, 13 at c = 10).
  it("E_k(c V) = c^k E_k(V) to order 150 for c = 1, 2, 10", function()
    local H0 = D { 0, 0, 1 }
    local M = ls.matrix { { 0.3, 0.5, 0.2 }, { 0.5, -0.1, 0.4 }, { 0.2, 0.4, 0.0 } }
    local s1 = ls.perturb(H0, M, { order = 150 })
    for _, c in ipairs { 1, 2, 10 } do
      local sc = ls.perturb(H0, c * M, { order = 150 })
      assert.is_true(scaled_gap(sc, s1, 3, 150, c) < 1e-12, "c = " .. c)
      -- first order: the eigenvalues of c M on the degenerate pair
      -- (closed form of a 2 x 2: (0.2 -+ sqrt(0.16 + 1)) / 2 c; common practice)
      assert.near(c * (0.2 - math.sqrt(0.16 + 1)) / 2, sc:energy(1, 1), 1e-13 * c)
    end
  end)

  -- 23Na ground state (I = 3/2; A = 885.813 MHz and the nuclear g 1.4784,
  -- from memory: Arimondo, Inguscio & Violino, Rev. Mod. Phys. 49, 31
  -- (1977)): the Zeeman series per tesla equals the series per mT rescaled
  -- by 1000^k. Per tesla the Zeeman term is 16x the hyperfine splitting, so
  -- the higher orders grow like 16^k.
  it("23Na per tesla equals per mT rescaled, to order 30", function()
    local function series(unit)
      local m = ls.recipe("hyperfine", { nuclear_spin = 1.5, hyperfine = 885.813, nuclear_g = 1.4784, field = 1,
        field_unit = unit })
      return ls.perturb(m.H0, m.V, { order = 30 })
    end
    local sT, smT = series("T"), series("mT")
    assert.is_true(scaled_gap(sT, smT, 8, 30, 1000) < 1e-12)
    -- first order g_F m_F mu_B B (common practice): the six levels with
    -- m_F ~= 0 are split by more than 100 MHz at 1 T, the two m_F = 0 not at all
    local split = 0
    for lev = 1, 8 do
      local e1 = math.abs(sT:energy(lev, 1))
      if e1 > 100 then split = split + 1 else assert.is_true(e1 < 1e-9) end
    end
    assert.equal(6, split)
  end)

  -- A far level or a constant offset does not change the series of the
  -- others: degen_tol is relative to the spacing scale (the median gap), not
  -- to the largest energy (common practice: the tolerance is judged on the
  -- scale of the levels it separates). It once merged 0, 1, 2, 3 beside 1e12
  -- into one "degenerate" group.
  it("ignores a far level and a constant offset", function()
    local function V(n) return mk(n, function(i, j) return i == j and 0.1 * i or 0.05 / (i + j) end) end
    local sa = ls.perturb(D { 0, 1, 2, 3, 1e12 }, V(5), { order = 6, levels = { 1, 2, 3, 4 } })
    local sb = ls.perturb(D { 0, 1, 2, 3 }, V(4), { order = 6 })
    for lev = 1, 4 do
      -- the far level's own share is ~ V^2 / 1e12 (second order; common practice)
      for k = 1, 6 do assert.near(sb:energy(lev, k), sa:energy(lev, k), 1e-9 * math.abs(sb:energy(lev, k)) + 1e-13) end
    end
    local W = mk(3, function(i, j) return i == j and 0.3 * i or 0.7 / (i + j) end)
    local so = ls.perturb(D { 2e11, 2e11 + 5, 2e11 + 10 }, W, { order = 6 })
    local sn = ls.perturb(D { 0, 5, 10 }, W, { order = 6 })
    for lev = 1, 3 do
      for k = 1, 6 do assert.near(sn:energy(lev, k), so:energy(lev, k), 1e-9 * math.abs(sn:energy(lev, k))) end
    end
    local _, _, _, spacing = so:grouping()
    assert.equal(5, spacing)
    -- no small-denominator warning on the model's own scale
    assert.is_nil(tostring(so):find("small denominator", 1, true))
  end)

  -- The quartic oscillator's series is asymptotic, E_k ~ (-1)^(k+1) 3^k
  -- Gamma(k + 1/2) (Bender & Wu, Phys. Rev. 184, 1231 (1969)): past order
  -- ~140 the terms overflow. s:at is then an error naming the order.
  it("refuses to sum overflowed coefficients", function()
    local o = ls.oscillator(400)
    local s = ls.perturb(o.number, o.x ^ 4, { order = 145, levels = { 1 } })
    local first
    for k = 1, 145 do
      local c = s:energy(1, k)
      if not (math.abs(c) < math.huge) then first = first or k end
    end
    assert.is_not_nil(first)
    local ok, err = pcall(s.at, s, 1, 1e-3)
    assert.is_false(ok)
    assert.truthy(err:find(string.format("level 1: coefficient E(%d) is not finite (the terms overflowed); sum to " ..
      "order %d at most", first, first - 1), 1, true), err)
    assert.truthy(s:at(1, 1e-3, first - 1) == s:at(1, 1e-3, first - 1)) -- lower orders still sum
    assert.truthy(tostring(s):find(string.format("E(%d) and later are not finite", first), 1, true))
  end)

  -- Hermiticity is judged relative to the op's size: (x^4) on 100 levels has
  -- entries ~1e4 and rounding defects ~1e-12 (common practice).
  it("is_hermitian is relative to the largest entry", function()
    local x = ls.oscillator(100).x
    assert.is_true((x ^ 4):is_hermitian())
    assert.is_false(ls.matrix { { 1, 2 }, { 2.001, 1 } }:is_hermitian())
    assert.is_true(ls.matrix { { 1e-20, 2e-20 }, { 2e-20, 1e-20 } }:is_hermitian())
    assert.is_false(ls.matrix { { 1e-20, 2e-20 }, { 3e-20, 1e-20 } }:is_hermitian())
  end)
end)
