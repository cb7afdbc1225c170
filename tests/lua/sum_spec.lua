-- ls.sum: the one-pass merge (core._sum_terms, lvs_matrix_sum) against the
-- pairwise sum acc + term it replaces, its error texts, and spin-chain
-- spectra with known closed forms.
local ls = require "levelshift"

-- the reference: ls.sum as it was, one pairwise add per term
local function pairwise(first, last, f)
  local acc
  for i = first, last do
    local t = f(i)
    if t ~= nil then acc = acc == nil and t or acc + t end
  end
  return acc
end

-- every entry of a equals that of b to rounding (the merge adds in another
-- order); one assertion on the worst entry (luassert per entry is slow)
local function same(a, b)
  local r, c = a:dim()
  local rb, cb = b:dim()
  assert.are.equal(rb, r); assert.are.equal(cb, c)
  assert.are.equal(b:is_complex(), a:is_complex())
  local scale, worst, where = 0, 0, "none"
  for i = 1, r do
    for j = 1, c do
      local re, im = a:get(i, j)
      local rr, ri = b:get(i, j)
      scale = math.max(scale, math.abs(rr), math.abs(ri))
      local d = math.max(math.abs(re - rr), math.abs(im - ri))
      if not (d <= worst) then worst, where = d, i .. "," .. j end
    end
  end
  assert.is_true(worst <= 1e-14 * scale, "entry " .. where .. " differs by " .. worst)
end

local function chain(L, spin, coupling)
  local P = ls.product(ls.spin(spin), L)
  return P, function(i)
    local a, b = P:site(i), P:site(i + 1)
    return coupling(a, b, i)
  end
end

describe("sum", function()
  it("matches the pairwise sum on a Heisenberg chain (complex Sy terms)", function()
    local _, f = chain(6, 1/2, function(a, b, i) return (1 + 0.137 * i) * (a.Sx * b.Sx + a.Sy * b.Sy + a.Sz * b.Sz) end)
    local H = ls.sum(1, 5, f)
    same(H, pairwise(1, 5, f))
    assert.is_true(H:is_complex())
  end)

  it("matches with real terms, numbers, ls.I and nil terms", function()
    local P, f = chain(5, 1, function(a, b, i)
      if i == 2 then return nil end
      if i == 3 then return 0.385 end
      if i == 4 then return 0.25 * ls.I end
      return 2.385 * a.Sz * b.Sz + a.Sx * b.Sx
    end)
    local g = function(i) if i == 5 then return P:site(5).Sz end return f(i) end
    same(ls.sum(1, 5, g), pairwise(1, 5, g))
    local real = function(i) if i % 2 == 0 then return 1.5 end return P:site(i).Sz * P:site(i + 1).Sx end
    local s = ls.sum(1, 4, real)
    same(s, pairwise(1, 4, real))
    assert.is_false(s:is_complex())
  end)

  it("keeps a sum of numbers a number and a number before the first op", function()
    assert.are.equal(6, ls.sum(1, 3, function(i) return i end))
    local a = ls.matrix{{1.25, 0.5}, {0.5, -0.75}}
    local f = function(i) return i == 3 and a or 0.5 * i end
    same(ls.sum(1, 5, f), pairwise(1, 5, f))
    assert.are.equal(a, ls.sum(1, 3, function(i) return i == 2 and a or nil end))
  end)

  it("matches with padded oscillator terms and embedded plain ones", function()
    local B = ls.oscillator(9)
    local plain = ls.matrix{{0.7, 0.2, 0, 0, 0, 0, 0, 0, 0}, {0.2, 0, 0, 0, 0, 0, 0, 0, 0.3},
      {0, 0, 0, 0, 0, 0, 0, 0, 0}, {0, 0, 0, 0, 0, 0, 0, 0, 0}, {0, 0, 0, 0, 0, 0, 0, 0, 0},
      {0, 0, 0, 0, 0, 0, 0, 0, 0}, {0, 0, 0, 0, 0, 0, 0, 0, 0}, {0, 0, 0, 0, 0, 0, 0, 0, 0},
      {0, 0.3, 0, 0, 0, 0, 0, 0, -1.1}}
    local f = function(i)
      if i == 1 then return plain end -- plain first: the padded space comes later
      if i == 5 then return -0.625 end
      return (0.31 / i) * B.x ^ i
    end
    local s = ls.sum(1, 6, f)
    same(s, pairwise(1, 6, f))
    -- the padded edge stays exact: <8|x^2|8> = 8 + 1/2 (common practice)
    local x2 = ls.sum(1, 2, function(i) return i == 1 and B.x ^ 2 or B.x * 0 end)
    assert.near(8.5, (x2:get(9, 9)), 1e-13)
  end)

  it("matches with dense terms", function()
    local d = ls.matrix{{1, 2.5, 0}, {2.5, -1, 0.75}, {0, 0.75, 3}}
    local sp = ls.zeros(3)
    sp:set(1, 3, 0.4, -0.2)
    local f = function(i) return ({d, sp, 2, d * 0.5, nil, sp})[i] end
    local s = ls.sum(1, 6, f)
    same(s, pairwise(1, 6, f))
    assert.are.equal("dense", (s:storage()))
  end)

  it("drops entries that cancel, as the pairwise sum does", function()
    local P = ls.product(ls.spin(1/2), 3)
    local f = function(i) return (i % 2 == 1 and 1 or -1) * P:site(2).Sx end
    local s = ls.sum(1, 4, f)
    assert.are.equal(0, select(2, s:storage()))
    assert.are.equal(select(2, pairwise(1, 4, f):storage()), select(2, s:storage()))
  end)

  it("merges long sums in batches with the same result", function()
    local P = ls.product(ls.spin(1/2), 9)
    local f = function(i) local k = (i - 1) % 8 + 1 return (0.1 * i) * P:site(k).Sz * P:site(k + 1).Sz + P:site(k).Sx end
    same(ls.sum(1, 40, f), pairwise(1, 40, f))
  end)

  it("matches on long sparse columns (runs merged, not only insertion-sorted)", function()
    -- 40 sparse terms on 2000 states, 4 entries per column each, rows from
    -- a fixed congruential sequence: columns of the total pass 32 entries
    -- and collect many unsorted runs while the total stays sparse; checked
    -- by the Frobenius norm of the difference, |D|^2 = tr(D^T D)
    local seed = 12345
    local function rnd(n)
      seed = (seed * 1103515245 + 12345) % 2147483648
      return seed % n + 1
    end
    local n, terms = 2000, {}
    for k = 1, 40 do
      local m = ls.zeros(n)
      for j = 1, n do
        for _ = 1, 4 do m:set(rnd(n), j, 0.01 * rnd(97) - 0.5) end
      end
      terms[k] = m
    end
    local f = function(i) return terms[i] end
    local s, p = ls.sum(1, 40, f), pairwise(1, 40, f)
    assert.are.equal("sparse", (s:storage()))
    assert.are.equal(select(2, p:storage()), select(2, s:storage()))
    local d = s - p
    local dd, pp = (d:adj() * d):trace(), (p:adj() * p):trace()
    assert.is_true(dd <= 1e-28 * pp, "difference " .. dd .. " of " .. pp)
  end)

  it("gives S.S of two spins 1/2 the eigenvalues 1/4 (triplet) and -3/4 (singlet)", function()
    -- source: common practice, S1.S2 = (S(S+1) - 3/2)/2 with S = 1 or 0
    local _, f = chain(2, 1/2, function(a, b) return a.Sx * b.Sx + a.Sy * b.Sy + a.Sz * b.Sz end)
    local E = ls.eigen(ls.sum(1, 1, f) + ls.sum(1, 1, function() return 0 end))
    assert.near(-0.75, E[1], 1e-14)
    for k = 2, 4 do assert.near(0.25, E[k], 1e-14) end
  end)

  it("gives the open XX chain its free-fermion ground energy", function()
    -- source: Lieb, Schultz & Mattis, Ann. Phys. 16, 407 (1961): H = sum
    -- (Sx Sx + Sy Sy) maps to hopping 1/2, modes cos(k pi/(L+1)), k = 1..L;
    -- the ground state fills the negative ones
    local L = 8
    local _, f = chain(L, 1/2, function(a, b) return a.Sx * b.Sx + a.Sy * b.Sy end)
    local E = ls.eigen(ls.sum(1, L - 1, f), {count = 1})
    local e0 = 0
    for k = 1, L do
      local e = math.cos(k * math.pi / (L + 1))
      if e < 0 then e0 = e0 + e end
    end
    assert.near(e0, E[1], 1e-12)
  end)

  describe("errors", function()
    local a2 = ls.matrix{{1.5, 0.25}, {0.25, -2}}
    local a3 = ls.matrix{{1, 0, 0}, {0, 2, 0}, {0, 0, 3}}
    local r23 = ls.matrix{{1, 2, 3}, {4, 5, 6}}
    local function terms(list) return function(i) return list[i] end end

    it("names the argument", function()
      assert.error_matches(function() ls.sum(1.5, 2, print) end, "bad argument #1 to 'sum' (integer expected)", 1, true)
      assert.error_matches(function() ls.sum(1, "2", print) end, "bad argument #2 to 'sum' (integer expected)", 1, true)
      assert.error_matches(function() ls.sum(1, 2, 3) end, "bad argument #3 to 'sum' (function expected)", 1, true)
      assert.error_matches(function() ls.sum(1, 1 << 40, print) end,
        "bad argument #2 to 'sum' (the range 1..1099511627776 has more than 2^31 terms)", 1, true)
      assert.error_matches(function() ls.sum(1, 3, function() end) end, "sum: empty range 1..3 (no terms)", 1, true)
      assert.error_matches(function() ls.sum(2, 1, print) end, "sum: empty range 2..1 (no terms)", 1, true)
    end)

    it("names the term that cannot be added, as the pairwise sum did", function()
      local o5a, o5b = ls.oscillator(5, {pad = 3}), ls.oscillator(5, {pad = 4})
      local closed = ls.matrix{{1, 2}, {3, 4}}
      closed:close()
      local cases = {
        {{a2, a2, a3}, "sum: cannot add term 3 (add: dimension mismatch: 2x2 vs 3x3)"},
        {{o5a.x, o5a.number, o5b.x}, "sum: cannot add term 3 (add: operators belong to different bases (5 vs 5 states))"},
        {{o5a.x, a3}, "sum: cannot add term 2 (add: dimension mismatch: 5x5 vs 3x3)"},
        {{r23, r23, 2.5}, "sum: cannot add term 3 (add: adding a number needs a square matrix, got 2x3)"},
        {{1, r23}, "sum: cannot add term 2 (add: adding a number needs a square matrix, got 2x3)"},
        {{a2, a2, closed}, "sum: cannot add term 3 (bad argument #2 to 'add' (attempt to use a closed matrix))"},
        {{closed, a2}, "sum: cannot add term 2 (bad argument #1 to 'add' (attempt to use a closed matrix))"},
        {{a2, a2, {}}, "sum: cannot add term 3 (bad argument #2 to 'add' (levelshift.matrix or number expected, got table))"},
        {{a2, a2, "x"}, "sum: cannot add term 3 (bad argument #2 to 'add' (levelshift.matrix or number expected, got string))"},
        {{a2, a2, 0 / 0}, "sum: cannot add term 3 (bad argument #2 to 'add' (scalar is NaN or infinite))"},
        {{a2, ls.complex(1, math.huge)}, "sum: cannot add term 2 (bad argument #2 to 'add' (scalar is NaN or infinite))"},
        {{1, 2, {}}, "sum: cannot add term 3 (attempt to perform arithmetic on a table value (upvalue 'term'))"},
      }
      for _, c in ipairs(cases) do
        assert.error_matches(function() ls.sum(1, #c[1], terms(c[1])) end, c[2], 1, true)
      end
    end)

    it("checks the list of its core merge", function()
      assert.error_matches(function() ls._sum_terms{} end, "bad argument #1 to '_sum_terms' (needs at least one term)", 1, true)
      assert.error_matches(function() ls._sum_terms{a2, {}} end, "term 2 is not a matrix or a number", 1, true)
      assert.error_matches(function() ls._sum_terms{1, 2} end, "sum: no term is an operator", 1, true)
      assert.error_matches(function() ls._sum_terms{a2, a3} end, "sum: dimension mismatch: term 1 is 2x2, term 2 is 3x3", 1, true)
    end)
  end)
end)
