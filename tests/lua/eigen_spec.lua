-- Exact spectra through LAPACKE.
local ls = require "levelshift"

describe("eigen", function()
  it("splits a symmetric 2x2 pair", function()
    -- source: closed form (a+d)/2 -/+ sqrt(((a-d)/2)^2 + b^2) (common practice)
    local E, U = ls.eigen(ls.matrix{{1.3, 0.4}, {0.4, -0.7}})
    local lo = 0.3 - math.sqrt(1 + 0.16)
    assert.near(lo, E[1], 1e-14)
    assert.near(0.6 - lo, E[2], 1e-14)
    local r, c = U:dim()
    assert.are.equal(2, r); assert.are.equal(2, c)
  end)
  it("handles complex Hermitian matrices", function()
    -- spin-1/2 in a field along (1,1,1)/sqrt3: levels -/+ 1/2 (common practice)
    local s = ls.spin(0.5)
    local H = (s.Sx + s.Sy + s.Sz) / math.sqrt(3)
    local E = ls.eigen(H)
    assert.near(-0.5, E[1], 1e-14); assert.near(0.5, E[2], 1e-14)
  end)
  it("returns a lowest subset with vectors that diagonalize H", function()
    local o = ls.oscillator(60)
    local H = o.number + 0.5 + 0.37 * o.x ^ 4
    local Eall = ls.eigen(H, { vectors = false })
    local E, U = ls.eigen(H, { count = 4 })
    assert.are.equal(4, #E)
    for k = 1, 4 do assert.near(Eall[k], E[k], 1e-10) end
    local D = U:adj() * H * U
    assert.near(E[3], (D:get(3, 3)), 1e-10)
    assert.near(0, (D:get(1, 3)), 1e-10)
  end)
  describe("errors", function()
    it("non-Hermitian input says by how much and where", function()
      assert.error_matches(function() ls.eigen(ls.matrix{{1, 2}, {0.5, 1}}) end,
        "bad argument #1 to 'eigen' (matrix is not Hermitian: |H(1,2) - conj(H(2,1))| = 1.5", 1, true)
    end)
    it("non-square, bad count, bad options", function()
      assert.error_matches(function() ls.eigen(ls.zeros(2, 3)) end, "matrix must be square, got 2x3", 1, true)
      assert.error_matches(function() ls.eigen(ls.matrix{{1}}, { count = 2 }) end, "count must be from 1 to 1, got 2", 1, true)
      assert.error_matches(function() ls.eigen(ls.matrix{{1}}, { cnt = 1 }) end, "unknown option 'cnt'", 1, true)
      assert.error_matches(function() ls.eigen("H") end, "bad argument #1 to 'eigen' (levelshift.matrix expected", 1, true)
    end)
    it("refuses dense storage above the cap instead of dying", function()
      local P = ls.product(ls.spin(0.5), 21) -- 2,097,152 states
      local H = P:site(1).Sz
      assert.error_matches(function() ls.eigen(H) end, "above the dense cap", 1, true)
      local old = ls.config().dense_cap
      ls.config{ dense_cap = 1e6 }
      assert.error_matches(function() ls.eigen(ls.oscillator(400).x) end, "above the dense cap", 1, true)
      ls.config{ dense_cap = old }
      assert.error_matches(function() ls.config{ dense_cap = -1 } end, "dense_cap must be a positive number", 1, true)
    end)
  end)
end)
