-- Spectra block by block (symmetry sectors) and of sparse tridiagonal ops.
local ls = require "levelshift"

-- a dense copy: adding and removing a dense matrix forces dense storage
local function densify(H)
  local n = H:dim()
  local rows = {}
  for i = 1, n do rows[i] = {} for j = 1, n do rows[i][j] = 1 end end
  local D = ls.matrix(rows)
  local out = (H + D) - D
  assert.are.equal("dense", (out:storage()))
  return out
end

local function xx_chain(L, h)
  local P = ls.product(ls.spin(0.5), L)
  local H = ls.sum(1, L, function(i) return (h + 0.137 * i) * P:site(i).Sz end)
  for i = 1, L - 1 do
    local a, b = P:site(i), P:site(i + 1)
    H = H + (0.5 + 0.1 * i) * (a.Sp * b.Sm + a.Sm * b.Sp)
  end
  return H
end

describe("eigen by symmetry sectors", function()
  it("splits the quartic oscillator into parity sectors and agrees with the dense solver", function()
    -- x^4 couples n to n +- 2, n +- 4 only: even and odd n never mix (common practice)
    local o = ls.oscillator(80)
    local H = o.number + 0.5 + 0.1 * o.x ^ 4
    assert.are.equal("sparse", (H:storage()))
    local E, U = ls.eigen(H)
    local Ed = ls.eigen(densify(H), { vectors = false })
    for k = 1, 80 do assert.near(Ed[k], E[k], 1e-10 * math.max(1, math.abs(Ed[k]))) end
    -- quartic ground level at g = 0.1 (README example, N = 80): 0.559146327183
    assert.near(0.559146327183, E[1], 1e-11)
    local D = U:adj() * H * U
    for k = 1, 80, 7 do assert.near(E[k], (D:get(k, k)), 1e-9 * math.max(1, E[k])) end
    assert.near(0, (D:get(1, 2)), 1e-9)
    -- the ground state lives in the even sector: odd components vanish
    for i = 2, 80, 2 do assert.are.equal(0, (U:get(i, 1))) end
  end)
  it("splits a spin chain into total-Sz sectors; lowest subsets merge across sectors", function()
    -- invented XX chain in a graded field; the XX coupling conserves total Sz
    local H = xx_chain(7, 0.3)
    local Ed = ls.eigen(densify(H), { vectors = false })
    local E, U = ls.eigen(H, { count = 9 })
    for k = 1, 9 do assert.near(Ed[k], E[k], 1e-12) end
    local D = U:adj() * H * U
    for k = 1, 9 do assert.near(E[k], (D:get(k, k)), 1e-12) end
    local E2, U2 = ls.eigen(H, { count = 9 })
    for k = 1, 9 do
      assert.are.equal(E[k], E2[k]) -- deterministic, bit for bit
      assert.are.equal((U:get(5, k)), (U2:get(5, k)))
    end
  end)
  it("sorts a diagonal op without LAPACK, ties in state order", function()
    local D = ls.zeros(5)
    for i, v in ipairs{ 2.5, -1.25, 0.75, -1.25, 3 } do D:set(i, i, v) end
    local E, U = ls.eigen(D, { count = 3 })
    assert.are.same({ -1.25, -1.25, 0.75 }, E)
    assert.are.equal(1, (U:get(2, 1))); assert.are.equal(1, (U:get(4, 2))); assert.are.equal(1, (U:get(3, 3)))
    assert.are.equal(0, (U:get(4, 1)))
    local Ez = ls.eigen(D * ls.I * ls.I * -1, { count = 1, vectors = false })
    assert.are.equal(-1.25, Ez[1])
  end)
  it("takes the sectors from the user", function()
    -- invented 4x4 with blocks {1, 3} and {2, 4}
    local H = ls.matrix{ { 1.3, 0, 0.4, 0 }, { 0, -0.7, 0, 0.25 }, { 0.4, 0, 2.1, 0 }, { 0, 0.25, 0, 0.9 } }
    local E, U = ls.eigen(H, { blocks = { { 1, 3 }, { 2, 4 } } })
    local Ed = ls.eigen(densify(H), { vectors = false })
    for k = 1, 4 do assert.near(Ed[k], E[k], 1e-14) end
    -- source: closed form (a+d)/2 -/+ sqrt(((a-d)/2)^2 + b^2) (common practice)
    assert.near(0.1 - math.sqrt(0.8 ^ 2 + 0.25 ^ 2), E[1], 1e-14)
    assert.are.equal(0, (U:get(1, 1)))
    assert.error_matches(function() ls.eigen(H, { blocks = { { 1, 2 }, { 3, 4 } } }) end,
      "bad argument #2 to 'eigen' (option 'blocks': entry (3, 1) = 0.4 couples two blocks)", 1, true)
    assert.error_matches(function() ls.eigen(H, { blocks = { { 1, 3 }, { 2, 4, 4 } } }) end, "state 4 is listed twice", 1, true)
    assert.error_matches(function() ls.eigen(H, { blocks = { { 1, 3 }, { 2 } } }) end, "state 4 is in no block", 1, true)
    assert.error_matches(function() ls.eigen(H, { blocks = { { 1, 3 }, {} } }) end, "block 2 is empty", 1, true)
    assert.error_matches(function() ls.eigen(H, { blocks = { { 1, 5 } } }) end, "not a state 1..4", 1, true)
    assert.error_matches(function() ls.eigen(H, { blocks = 3 }) end, "option 'blocks' must be a table", 1, true)
  end)
  it("uses the tridiagonal driver for a large radial grid without a dense copy", function()
    -- 20000 points: a dense copy would need 3.2 GB; dstevr needs O(n)
    ls.config{ dense_cap = 64 * 2 ^ 20 }
    local H = ls.radial(20000, { rmax = 50 })
    local E, U = ls.eigen(H, { count = 3 })
    ls.config{ dense_cap = 4 * 2 ^ 30 }
    -- Bohr levels -1/(2 n^2) (common practice), within the grid's accuracy
    assert.near(-0.5, E[1], 1e-5); assert.near(-0.125, E[2], 1e-5); assert.near(-1 / 18, E[3], 1e-5)
    local s = ls.perturb_solve(H, ls.zeros(20000), { order = 1, level = 2 })
    assert.near(s:energy(0), E[2], 1e-11)
    local r, c = U:dim()
    assert.are.equal(20000, r); assert.are.equal(3, c)
  end)
end)
