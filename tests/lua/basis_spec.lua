-- Bases and their operators, checked against closed forms.
local ls = require "levelshift"

local function commutator(a, b) return a * b - b * a end

local function max_diff(a, b)
  local n = a:dim()
  local worst = 0
  for i = 1, n do for j = 1, n do
    local ar, ai = a:get(i, j)
    local br, bi = b:get(i, j)
    worst = math.max(worst, math.abs(ar - br), math.abs(ai - bi))
  end end
  return worst
end

describe("spin", function()
  -- source: Sakurai & Napolitano, Modern Quantum Mechanics, 2nd ed. (2011),
  -- eqs. 3.1.20 ([Sx, Sy] = i Sz) and 3.5.34 (S^2 = S(S+1)).
  for twoS = 1, 7 do
    local S = twoS / 2
    it("obeys [Sx, Sy] = i Sz and S^2 = S(S+1) for S = " .. S, function()
      local s = ls.spin(S)
      assert.are.equal(twoS + 1, s:dim())
      assert.is_true(max_diff(commutator(s.Sx, s.Sy), ls.I * s.Sz) < 1e-13)
      assert.is_true(max_diff(commutator(s.Sy, s.Sz), ls.I * s.Sx) < 1e-13)
      local S2 = s.Sx ^ 2 + s.Sy ^ 2 + s.Sz ^ 2
      assert.is_true(max_diff(S2, S * (S + 1) * s:identity()) < 1e-12)
      assert.is_true(max_diff(s.Sp, s.Sx + ls.I * s.Sy) < 1e-14)
    end)
  end
  it("orders states from m = +S down", function()
    local s = ls.spin(1.5)
    assert.are.equal(1.5, s:labels(1).m)
    assert.are.equal(-1.5, s:labels(4).m)
    assert.are.equal("m=3/2", s:describe(1))
  end)
  it("refuses S that is not a multiple of 1/2", function()
    assert.error_matches(function() ls.spin(0.3) end,
      "bad argument #1 to 'spin' (S must be a positive multiple of 1/2", 1, true)
    assert.error_matches(function() ls.spin(0) end, "positive multiple of 1/2", 1, true)
    assert.error_matches(function() ls.spin("a") end, "bad argument #1 to 'spin'", 1, true)
  end)
end)

describe("oscillator", function()
  -- <m|x^4|n> closed form from x = (a + a^+)/sqrt 2 (hbar = m = omega = 1):
  -- <n|x^4|n> = (6n^2 + 6n + 3)/4, <n+2|x^4|n> = (2n+3) sqrt((n+1)(n+2))/2,
  -- <n+4|x^4|n> = sqrt((n+1)(n+2)(n+3)(n+4))/4.
  -- source: Sakurai & Napolitano (2011), eq. 2.3.24 applied four times; the
  -- diagonal value is also Griffiths, Introduction to QM, 2nd ed., problem 6.
  local function x4(m, n)
    if m < n then m, n = n, m end
    local d = m - n
    if d == 0 then return (6 * n * n + 6 * n + 3) / 4 end
    if d == 2 then return (2 * n + 3) * math.sqrt((n + 1) * (n + 2)) / 2 end
    if d == 4 then return math.sqrt((n + 1) * (n + 2) * (n + 3) * (n + 4)) / 4 end
    return 0
  end
  it("gives exact <m|x^4|n> right up to the edge of the basis", function()
    local N = 9
    local o = ls.oscillator(N)
    local a = o.x ^ 4
    local b = o.x * o.x * o.x * o.x
    for i = 1, N do for j = 1, N do
      assert.near(x4(i - 1, j - 1), (a:get(i, j)), 1e-12)
      assert.near(x4(i - 1, j - 1), (b:get(i, j)), 1e-12)
    end end
  end)
  it("keeps x^2 p^2 exact at the edge", function()
    -- x^2 p^2 = (a+a^+)^2 (a^+-a)^2 (i^2)/(-2)... compared with the same
    -- product built in a much larger basis (common practice)
    local small, big = ls.oscillator(6), ls.oscillator(40)
    local s = small.x ^ 2 * small.p ^ 2
    local b = big.x ^ 2 * big.p ^ 2
    for i = 1, 6 do for j = 1, 6 do
      local sr, si = s:get(i, j)
      local br, bi = b:get(i, j)
      assert.near(br, sr, 1e-12); assert.near(bi, si, 1e-12)
    end end
  end)
  it("has [x, p] = i away from the edge and number = raise*lower", function()
    local o = ls.oscillator(12)
    local c = o.x * o.p - o.p * o.x
    local re, im = c:get(5, 5)
    assert.near(0, re, 1e-13); assert.near(1, im, 1e-13)
    assert.is_true(max_diff(o.number, o.raise * o.lower) < 1e-13)
  end)
  it("refuses a product beyond its padding", function()
    local o = ls.oscillator(5, { pad = 1 })
    assert.error_matches(function() return o.x ^ 6 end, "beyond the padding", 1, true)
  end)
  it("refuses bad sizes and options", function()
    assert.error_matches(function() ls.oscillator(0) end, "bad argument #1 to 'oscillator' (oscillator basis size must be positive)", 1, true)
    assert.error_matches(function() ls.oscillator(-4) end, "must be positive", 1, true)
    assert.error_matches(function() ls.oscillator(4, { padd = 2 }) end, "unknown option 'padd' (accepted: pad)", 1, true)
  end)
end)

describe("quartic oscillator", function()
  it("matches the ground level of p^2/2 + x^2/2 + 0.1 x^4", function()
    -- source: Hioe & Montroll, J. Math. Phys. 16, 1945 (1975), ground level of
    -- p^2 + x^2 + lambda x^4 at lambda = 0.2: 1.118292654367 (from memory);
    -- ours is half of it. Independent check: NumPy dense diagonalization in
    -- ../shared/bench gives 0.5591463271835195.
    local o = ls.oscillator(120)
    local H = o.number + 0.5 + 0.1 * o.x ^ 4
    local E = ls.eigen(H, { count = 3, vectors = false })
    assert.near(0.5591463271835195, E[1], 1e-11)
  end)
end)

describe("products and builders", function()
  it("embeds site operators and sums by index", function()
    local P = ls.product(ls.spin(0.5), 3)
    assert.are.equal(8, P:dim())
    local H = ls.sum(1, 2, function(i) return P:site(i).Sz * P:site(i + 1).Sz end)
    -- |up up up>: energy 1/4 + 1/4
    assert.near(0.5, (H:get(1, 1)), 1e-15)
    assert.are.equal("m1=1/2 m2=-1/2 m3=1/2", P:describe(3))
  end)
  it("mixes padded oscillators and spins", function()
    local P = ls.product(ls.oscillator(4), ls.spin(0.5))
    local x, sz = P:site(1).x, P:site(2).Sz
    local m = (x * sz) ^ 2
    -- (x sz)^2 = x^2/4, <3|x^2|3> = 7/2 at the edge (n = 3)
    assert.near(7 / 8, (m:get(7, 7)), 1e-14)
  end)
  it("builds diagonal and general matrices by index and states by label", function()
    local o = ls.oscillator(5)
    local d = o:diag(function(s) return s.n + 0.5 end)
    assert.near(4.5, (d:get(5, 5)), 0)
    local m = o:matrix(function(s, t) if s.n == t.n + 1 then return math.sqrt(s.n) end end)
    assert.is_true(max_diff(m, o.raise) < 1e-15)
    local v = o:state{ n = 2 }
    assert.are.equal(1, (v:get(3, 1)))
    local b = ls.basis{ "g", "e" }
    local ve = b:state("e")
    assert.are.equal(1, (ve:get(2, 1)))
  end)
  it("reports builder errors clearly", function()
    local o = ls.oscillator(3)
    assert.error_matches(function() o:diag(function() return "x" end) end, "diag: the function returned a string", 1, true)
    assert.error_matches(function() o:diag(function() return 0 / 0 end) end, "NaN or inf", 1, true)
    assert.error_matches(function() o:state{ n = 7 } end, "no state of the basis has these labels", 1, true)
    assert.error_matches(function() ls.basis(0) end, "basis size must be positive", 1, true)
    assert.error_matches(function() ls.product(ls.spin(1), 0) end, "count must be an integer from 1 to 64", 1, true)
    assert.error_matches(function() return ls.product(ls.spin(1), 2).Sz end, "use P:site(i).Sz", 1, true)
    assert.error_matches(function() return o.Sz end, "oscillator has no operator 'Sz'", 1, true)
    assert.error_matches(function() ls.sum(1, 0, function(i) return i end) end, "empty range", 1, true)
  end)
  it("keeps the basis alive through a site view", function()
    local site = ls.product(ls.spin(1), 2):site(2)
    collectgarbage(); collectgarbage()
    assert.are.equal(9, (site.Sz:dim()))
  end)
  it("closes once for real; a second close is harmless and use after close is an error", function()
    local B = ls.spin(1)
    B:close()
    B:close() -- common practice: closing twice must not raise
    assert.has_error(function() return B.Sz end)
    local ok, msg = pcall(function() return B:dim() end)
    assert.is_false(ok)
    assert.matches("closed basis", msg)
  end)
  it("builds a large op column by column with B:sparse (one call per state)", function()
    -- <n-1|x|n> = sqrt(n/2), <n+1|x|n> = sqrt((n+1)/2) (hbar = m = omega = 1; Sakurai, Modern
    -- Quantum Mechanics, 1994, eq. 2.3.25): the same entries as the oscillator's own x
    local N = 5000
    local seen = {}
    local X = ls.basis(N):sparse(function(s)
      seen[#seen + 1] = s.index
      local n, c = s.index - 1, {}
      if n > 0 then c[s.index - 1] = math.sqrt(n / 2) end
      if s.index < N then c[s.index + 1] = math.sqrt((n + 1) / 2) end
      return c
    end)
    assert.are.equal(N, #seen) -- once per state
    local kind, nnz = X:storage()
    assert.are.equal("sparse", kind)
    assert.are.equal(2 * (N - 1), nnz)
    local ref = ls.oscillator(N).x
    for _, ij in ipairs { { 2, 1 }, { 1, 2 }, { 4000, 4001 }, { 5000, 4999 } } do
      assert.is_true(math.abs(ref:get(ij[1], ij[2]) - X:get(ij[1], ij[2])) <= 1e-13)
    end
    -- labels arrive in the state table; complex values and nil columns are fine
    local P = ls.product(ls.spin(0.5), 2)
    local Y = P:sparse(function(s) if s.m1 == 0.5 then return { [s.index] = ls.I } end end)
    local re, im = Y:get(1, 1)
    assert.are.equal(0, re); assert.are.equal(1, im)
    local ok, e = pcall(function() return ls.basis(3):sparse(function() return { [4] = 1 } end) end)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("not a row from 1 to 3", 1, true), e)
    ok, e = pcall(function() return ls.basis(3):sparse(function() return 5 end) end)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("expected a table {[row] = value}", 1, true), e)
  end)
end)
