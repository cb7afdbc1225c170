-- Storage follows structure: ops from large bases stay sparse through sums
-- and products while the result is sparse, and go dense when it fills in.
local ls = require "levelshift"

local function nnz(m) return select(2, m:storage()) end

describe("sparse storage", function()
  local L = 10
  local P = ls.product(ls.spin(0.5), L)
  local H = ls.sum(1, L - 1, function(i)
    local a, b = P:site(i), P:site(i + 1)
    return a.Sx * b.Sx + a.Sy * b.Sy + a.Sz * b.Sz
  end)
  it("keeps a spin-1/2 chain Hamiltonian sparse with the expected entries", function()
    -- open Heisenberg chain of 10 spins 1/2 (common practice): every basis
    -- state has a nonzero diagonal (9 bonds, so +-1/4 never cancel), and
    -- each bond flips its antiparallel pairs: 9 * 2^9 off-diagonal entries
    assert.are.equal("sparse", (H:storage()))
    assert.are.equal(1024 + 9 * 512, nnz(H))
    assert.are.equal("sparse", (P:site(3).Sy:storage()))
    assert.are.equal(1024, nnz(P:site(3).Sy))
  end)
  it("keeps sums, scalings, shifts, adjoints and products sparse", function()
    for _, m in ipairs{ H + 0.37 * P:site(1).Sz, 2.5 * H, H - 1.25, H:adj(), H * ls.I, H * H, H ^ 2 } do
      assert.are.equal("sparse", (m:storage()))
    end
    -- H^2 connects states at most two flips apart: fill stays under 2%
    assert.is_true(nnz(H * H) < 0.02 * 1024 * 1024)
    -- the sector solver (total Sz blocks, found automatically) against one
    -- dense block holding every state
    local E = ls.eigen(H, { count = 3, vectors = false })
    local all = {}
    for i = 1, 1024 do all[i] = i end
    local Ed = ls.eigen(H, { count = 3, vectors = false, blocks = { all } })
    for k = 1, 3 do assert.near(Ed[k], E[k], 1e-12) end
  end)
  it("keeps big oscillator bases sparse and banded", function()
    local o = ls.oscillator(3000)
    local H = o.number + 0.5 + 0.1 * o.x ^ 4
    assert.are.equal("sparse", (H:storage()))
    assert.are.equal(4, H:bandwidth()) -- x^4 moves n by at most 4 (METHODS.md 7)
    assert.are.equal(2, (o.x * o.p):bandwidth())
    assert.are.equal("sparse", ((o.x * o.p - o.p * o.x):storage()))
    -- [x, p] = i on every kept level (common practice)
    local re, im = (o.x * o.p - o.p * o.x):get(2999, 2999)
    assert.near(0, re, 1e-12); assert.near(1, im, 1e-12)
  end)
  it("measures the bandwidth over nonzero entries only", function()
    local H = ls.radial(300, { rmax = 30 })
    H:set(5, 9, 1.0); H:set(12, 3, -2.0)
    assert.are.equal(9, H:bandwidth()) -- |12 - 3|
    H:set(12, 3, 0) -- stored or dropped: no longer counts
    assert.are.equal(4, H:bandwidth())
    H:set(5, 9, 0)
    assert.are.equal(1, H:bandwidth())
    assert.are.equal(1, (H * ls.I):bandwidth()) -- complex storage
    assert.are.equal(0, ls.zeros(5):bandwidth())
  end)
  it("goes dense when a product fills in", function()
    -- an arrow matrix (first row and column full) squares to a full matrix
    local n = 40
    local A = ls.zeros(n)
    for i = 1, n do A:set(i, i, 1.5 + i / 7); A:set(1, i, 0.31); A:set(i, 1, 0.31) end
    assert.are.equal("sparse", (A:storage()))
    assert.are.equal("dense", ((A * A):storage()))
    assert.near((A * A):get(7, 9), 0.31 * 0.31, 1e-15)
  end)

  -- a plain sparse op next to a padded one is embedded entry by entry; the
  -- products must equal those with the padded op's plain visible block
  -- (common practice: the same matrix product two ways)
  it("multiplies a plain sparse op with a padded one as with its visible block", function()
    local n = 40
    local o = ls.oscillator(n)
    local P = ls.zeros(n, n)
    P:set(1, 3, 2)
    P:set(5, 2, -1, 0.5)
    P:set(40, 40, 3)
    assert.are.equal("sparse", (P:storage()))
    local plain = ls.zeros(n, n)
    for i = 1, n do
      for j = 1, n do plain:set(i, j, (o.x:get(i, j))) end
    end
    local A, B = o.x * P + P * o.x, plain * P + P * plain
    for i = 1, n do
      for j = 1, n do
        local ar, ai = A:get(i, j)
        local br, bi = B:get(i, j)
        assert.are.equal(br, ar)
        assert.are.equal(bi or 0, ai or 0)
      end
    end
  end)
end)
