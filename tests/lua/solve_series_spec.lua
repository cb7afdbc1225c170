-- Radial grids, block assembly and the linear-solve (Dalgarno-Lewis) series.
local ls = require "levelshift"

-- H0 = blockdiag(H_l=0, H_l=1, ...), V = z = r cos(theta) between the
-- sectors, <l+1,0|cos|l,0> = (l+1)/sqrt((2l+1)(2l+3)) (common practice)
local function hydrogen(n, rmax, lmax)
  local H, grid, vg = {}, {}, {}
  local _, r = ls.radial(n, { rmax = rmax })
  for l = 0, lmax do H[l + 1] = ls.radial(n, { rmax = rmax, l = l }) end
  for i = 1, lmax + 1 do
    grid[i], vg[i] = {}, {}
    for j = 1, lmax + 1 do grid[i][j], vg[i][j] = 0, 0 end
    grid[i][i] = H[i]
  end
  for l = 0, lmax - 1 do
    local c = (l + 1) / math.sqrt((2 * l + 1) * (2 * l + 3))
    vg[l + 1][l + 2], vg[l + 2][l + 1] = c * r, c * r
  end
  return ls.blocks(grid), ls.blocks(vg), H, r
end

describe("radial grids", function()
  it("are sparse tridiagonal with r_i = i h", function()
    local H, r = ls.radial(300, { rmax = 30, l = 1 })
    local kind, nnz = H:storage()
    assert.are.equal("sparse", kind)
    assert.are.equal(3 * 300 - 2, nnz)
    assert.are.equal(1, H:bandwidth())
    assert.are.equal(0, r:bandwidth())
    assert.near(7 * 30 / 301, (r:get(7, 7)), 1e-14)
    -- H_ii = 1/h^2 + l(l+1)/(2 r^2) - 1/r, H_i,i+1 = -1/(2h^2) (common practice)
    local h = 30 / 301
    assert.near(1 / h ^ 2 + 1 / (7 * h) ^ 2 - 1 / (7 * h), (H:get(7, 7)), 1e-9)
    assert.near(-0.5 / h ^ 2, (H:get(7, 8)), 1e-9)
  end)
  it("give the Bohr levels -Z^2/(2 n^2) with an O(h^2) error", function()
    -- source: Bohr formula E_n = -Z^2/(2 n^2) hartree; three-point
    -- differences converge as h^2 (common practice)
    local function e1(n, Z) return ls.perturb_solve(ls.radial(n, { rmax = 40 / Z, charge = Z }), ls.zeros(n), { order = 1 }):energy(0) end
    local a, b = e1(400, 1), e1(800, 1)
    assert.near(-0.5, b, 1e-3)
    local ratio = (a + 0.5) / (b + 0.5)
    assert.is_true(ratio > 3.7 and ratio < 4.3, "ratio " .. ratio)
    assert.near(-2.0, e1(800, 2), 4e-3)
    -- 2p is the lowest l = 1 level: -1/8
    assert.near(-0.125, ls.perturb_solve(ls.radial(800, { rmax = 60, l = 1 }), ls.zeros(800), { order = 1 }):energy(0), 1e-4)
  end)
  it("put several l channels side by side", function()
    local H, r = ls.radial(40, { rmax = 20, l = { 0, 2 } })
    local H2 = ls.radial(40, { rmax = 20, l = 2 })
    assert.are.equal(80, (H:dim())); assert.are.equal(40, (r:dim()))
    assert.are.equal(H2:get(5, 6), H:get(45, 46))
    assert.are.equal(0, (H:get(40, 41)))
    assert.error_matches(function() ls.radial(10, { l = { 0, -1 } }) end, "l must be from 0 to 100000", 1, true)
    assert.error_matches(function() ls.radial(10, { l = {} }) end, "l must be a number or a list of 1 to 1000 numbers", 1, true)
  end)
  it("check their arguments", function()
    assert.error_matches(function() ls.radial(1) end, "bad argument #1 to 'radial' (radial grid needs at least 2 points)", 1, true)
    assert.error_matches(function() ls.radial(10, { rmax = -2 }) end, "rmax must be positive and finite", 1, true)
    assert.error_matches(function() ls.radial(10, { l = -1 }) end, "l must be from 0 to 100000", 1, true)
    assert.error_matches(function() ls.radial(10, { lmax = 1 }) end, "unknown option 'lmax'", 1, true)
  end)
end)

describe("blocks", function()
  it("assemble block matrices that stay sparse", function()
    local A = ls.matrix{ { 1.25, 0.5 }, { 0.5, -0.75 } }
    local B = ls.matrix{ { 2.385 } }
    local C = ls.blocks{ { A, 0 }, { 0, B } }
    local r, c = C:dim()
    assert.are.equal(3, r); assert.are.equal(3, c)
    assert.near(0.5, (C:get(1, 2)), 0); assert.near(2.385, (C:get(3, 3)), 0)
    assert.near(0, (C:get(1, 3)), 0)
    local D = ls.blockdiag(A, B)
    assert.near(0, (D - C):trace(), 0)
    local S = ls.spin(2)
    local big = ls.blockdiag(S.Sz, S.Sz, S.Sz)
    assert.are.equal("sparse", (big:storage()))
    local O = ls.blocks{ { 0, S.Sp }, { S.Sm, 0 } }
    assert.near(2, (O:get(1, 7)), 1e-15) -- <2|S+|1> = sqrt(S(S+1) - m(m+1)) = 2 (METHODS.md 7)
    assert.are.equal(6, O:bandwidth()) -- (1, 7): the blocks' offsets count
    -- complex and dense blocks keep both parts; stored zeros are dropped
    local Z = ls.blocks{ { A * ls.I, 0 }, { 0, B } }
    local re, im = Z:get(1, 2)
    assert.are.equal(0, re); assert.are.equal(0.5, im)
    re, im = Z:get(3, 3)
    assert.are.equal(2.385, re); assert.are.equal(0, im)
    re, im = Z:get(2, 2)
    assert.are.equal(0, re); assert.are.equal(-0.75, im)
    assert.are.equal(0, (Z:get(1, 3)))
  end)
  it("check their arguments", function()
    local A, B = ls.matrix{ { 1 } }, ls.matrix{ { 1, 2 }, { 2, 1 } }
    assert.error_matches(function() ls.blocks{ { A, B } } end, "block (1, 2) has 2 rows, others in its row 1", 1, true)
    assert.error_matches(function() ls.blocks{ { A, 0 }, { 0, 0 } } end, "block row 2 has no matrix", 1, true)
    assert.error_matches(function() ls.blocks{ { A, "x" } } end, "block (1, 2) must be a matrix or 0", 1, true)
    assert.error_matches(function() ls.blocks{ { A }, { A, A } } end, "block row 2 has 2 entries, row 1 has 1", 1, true)
    assert.error_matches(function() ls.blockdiag() end, "at least one matrix expected", 1, true)
  end)
end)

describe("perturb_solve", function()
  it("gives the hydrogen polarizability 9/2 to the grid's accuracy", function()
    -- source: alpha(1s) = 9/2 a.u. (Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955));
    -- E(2) = -alpha/2 for V = F z with F = 1
    local err = {}
    for k, n in ipairs{ 1500, 3000 } do
      local H0, V = hydrogen(n, 60, 1)
      local s = ls.perturb_solve(H0, V, { order = 2 })
      err[k] = -2 * s:energy(2) - 4.5
      assert.are.equal("twisted", s:info().solver)
      assert.are.equal(1, s:info().bandwidth)
    end
    assert.is_true(math.abs(err[2]) < 2e-3)
    local ratio = err[1] / err[2] -- O(h^2): halving h quarters the error (common practice)
    assert.is_true(ratio > 3.6 and ratio < 4.4, "ratio " .. ratio)
  end)
  it("gives the fourth-order Stark shift -3555/64 with four l sectors", function()
    -- source: from memory, the hydrogen ground-state Stark series
    -- E = -1/2 - (9/4) F^2 - (3555/64) F^4 - ... (atomic units)
    local H0, V = hydrogen(4000, 60, 3)
    local s = ls.perturb_solve(H0, V, { order = 4 })
    assert.near(-9 / 4, s:energy(2), 1e-3)
    assert.near(-3555 / 64, s:energy(4), 0.03)
    assert.near(0, s:energy(1), 1e-12); assert.near(0, s:energy(3), 1e-9) -- parity
  end)
  it("agrees with the dense sum over states on a small grid", function()
    -- alpha = 2 sum_p |<p|z|1s>|^2 / (E_p - E_1s) (second-order RS, common practice)
    local n = 120
    local H0, V, H, r = hydrogen(n, 30, 1)
    local E0, U0 = ls.eigen(H[1], { count = 1 })
    local Ep, Up = ls.eigen(H[2])
    local zu = (r / math.sqrt(3)) * U0
    local c = Up:adj() * zu
    local sos = 0
    for p = 1, n do sos = sos + 2 * (c:get(p, 1)) ^ 2 / (Ep[p] - E0[1]) end
    local s = ls.perturb_solve(H0, V, { order = 2 })
    assert.near(sos, -2 * s:energy(2), 1e-10 * sos)
    assert.near(E0[1], s:energy(0), 1e-12)
  end)
  local function toy(n, band)
    -- invented banded H0 and dense V with high-entropy entries
    local H0, V = ls.zeros(n), ls.zeros(n)
    for i = 1, n do
      H0:set(i, i, 1.37 * i + 0.21 * math.sin(i))
      for d = 1, band do
        if i + d <= n then
          local x = 0.31 / d + 0.05 * math.cos(3 * i + d)
          H0:set(i, i + d, x); H0:set(i + d, i, x)
        end
      end
      for j = i, n do
        local y = 0.17 * math.sin(i * 1.7 + j * 0.9)
        V:set(i, j, y); V:set(j, i, y)
      end
    end
    return H0, V
  end
  for _, band in ipairs{ 0, 1, 2 } do
    it("matches ls.perturb to order 6 for excited levels (bandwidth " .. band .. ")", function()
      -- the eigenbasis RS recursion (METHODS.md 1; Hirschfelder, Byers Brown,
      -- Epstein, Adv. Quantum Chem. 1, 255 (1964)) on the same problem
      local H0, V = toy(14, band)
      for _, level in ipairs{ 1, 6 } do
        local d = ls.perturb(H0, V, { order = 6, levels = { level } })
        local s = ls.perturb_solve(H0, V, { order = 6, level = level })
        for k = 0, 6 do
          local ref = d:energy(level, k)
          assert.near(ref, s:energy(k), 1e-9 * math.max(1, math.abs(ref)))
        end
        assert.near(d:at(level, 0.05), s:at(0.05), 1e-10)
        if level > 1 and band > 0 then assert.are.equal(band == 1 and "dgttrf" or "dgbtrf", s:info().solver) end
      end
    end)
  end
  it("finds every level of the second-difference matrix", function()
    -- tridiag(-1, 2, -1) of size n has E_k = 2 - 2 cos(k pi/(n+1)) and
    -- eigenvectors sqrt(2/(n+1)) sin(i k pi/(n+1)) (common practice; e.g.
    -- G. Strang, Introduction to Applied Mathematics, 1986, sec. 1.5).
    -- Odd and even n: the Sturm count and the solves split at the middle row.
    for _, n in ipairs{ 2, 3, 4, 5, 8, 9, 61, 64 } do
      local H0 = ls.zeros(n)
      for i = 1, n do
        H0:set(i, i, 2)
        if i < n then H0:set(i, i + 1, -1); H0:set(i + 1, i, -1) end
      end
      local levels = n <= 9 and {} or { 1, 2, 31, n - 1, n }
      if n <= 9 then for k = 1, n do levels[k] = k end end
      for _, k in ipairs(levels) do
        local s = ls.perturb_solve(H0, ls.zeros(n), { order = 1, level = k })
        assert.near(2 - 2 * math.cos(k * math.pi / (n + 1)), s:energy(0), 1e-13)
        local psi, c = s:state(0), math.sqrt(2 / (n + 1))
        for i = 1, n do
          assert.near(math.abs(c * math.sin(i * k * math.pi / (n + 1))), math.abs((psi:get(i, 1))), 1e-11)
        end
      end
    end
  end)
  it("takes a known eigenpair and checks it", function()
    local H0, V = toy(10, 1)
    local E, U = ls.eigen(H0)
    local col = ls.zeros(10, 1)
    for i = 1, 10 do col:set(i, 1, (U:get(i, 3))) end
    local a = ls.perturb_solve(H0, V, { order = 3, state = col, energy = E[3] })
    local b = ls.perturb_solve(H0, V, { order = 3, level = 3 })
    for k = 0, 3 do assert.near(b:energy(k), a:energy(k), 1e-11) end
    local psi = a:state(1)
    assert.near(0, (col:adj() * psi):get(1, 1), 1e-12) -- intermediate normalization
    -- (E0 - H0) psi(1) = (V - E1) psi(0) (first-order equation, METHODS.md 1)
    local lhs = (E[3] - H0) * psi + (a:energy(1) - V) * col
    for i = 1, 10 do assert.near(0, (lhs:get(i, 1)), 1e-10) end
    assert.error_matches(function() a:state(3) end, "the state of order 3 needs a series of order 4", 1, true)
    col:set(1, 1, 1.0)
    assert.error_matches(function() ls.perturb_solve(H0, V, { state = col }) end,
      "bad argument #3 to 'perturb_solve' (state is not an eigenvector of H0", 1, true)
  end)
  it("prints, closes and reports errors", function()
    local H0, V = toy(6, 1)
    local s = ls.perturb_solve(H0, V, { order = 2 })
    assert.truthy(tostring(s):find("E(2) =", 1, true))
    assert.are.equal(2, s:order())
    s:close(); s:close()
    assert.error_matches(function() s:energy(1) end, "attempt to use a closed series", 1, true)
    assert.error_matches(function() ls.perturb_solve(H0, ls.zeros(5)) end, "bad argument #2 to 'perturb_solve' (V is 5x5 but H0 is 6x6)", 1, true)
    assert.error_matches(function() ls.perturb_solve(ls.zeros(2, 3), V) end, "H0 must be square, got 2x3", 1, true)
    assert.error_matches(function() ls.perturb_solve(H0, V, { order = 0 }) end, "order must be from 1 to 1000, got 0", 1, true)
    assert.error_matches(function() ls.perturb_solve(H0, V, { level = 7 }) end, "level must be from 1 to 6, got 7", 1, true)
    assert.error_matches(function() ls.perturb_solve(H0, V, { energy = 1 }) end, "option 'energy' needs option 'state'", 1, true)
    assert.error_matches(function() ls.perturb_solve(H0, V, { levels = { 1 } }) end, "unknown option 'levels'", 1, true)
    assert.error_matches(function() ls.perturb_solve(H0, V, { order = 2 }):energy(3) end, "order must be from 0 to 2, got 3", 1, true)
    assert.error_matches(function() ls.perturb_solve(H0 * ls.I, V) end, "H0 must be real", 1, true)
    local D = ls.matrix{ { 1, 0, 0 }, { 0, 1, 0 }, { 0, 0, 2 } }
    assert.error_matches(function() ls.perturb_solve(D, ls.zeros(3), { level = 2 }) end, "level 2 is degenerate", 1, true)
    local T = ls.radial(50, { rmax = 10 })
    local T2 = ls.blockdiag(T, T) -- two equal blocks: every level doubly degenerate
    assert.error_matches(function() ls.perturb_solve(T2, ls.zeros(100)) end, "level 1 is degenerate", 1, true)
    assert.error_matches(function() ls.perturb_solve(H0, ls.matrix{ { 0, 1, 0, 0, 0, 0 }, { 0, 0, 0, 0, 0, 0 }, { 0, 0, 0, 0, 0, 0 }, { 0, 0, 0, 0, 0, 0 }, { 0, 0, 0, 0, 0, 0 }, { 0, 0, 0, 0, 0, 0 } }) end,
      "bad argument #2 to 'perturb_solve' (V is not Hermitian", 1, true)
    local A = ls.radial(6, { rmax = 5 })
    A:set(1, 2, (A:get(1, 2)) + 0.5)
    assert.error_matches(function() ls.perturb_solve(A, V) end,
      "bad argument #1 to 'perturb_solve' (H0 is not Hermitian: |H(1,2) - conj(H(2,1))| = 0.5", 1, true)
    -- a lower entry whose upper partner is zero or not stored at all
    local B = ls.radial(6, { rmax = 5 })
    B:set(1, 2, 0)
    assert.error_matches(function() ls.perturb_solve(B, V) end,
      "bad argument #1 to 'perturb_solve' (H0 is not Hermitian: |H(1,2) - conj(H(2,1))|", 1, true)
    local C = ls.zeros(40, 40)
    C:set(1, 1, 0.25)
    local T40 = ls.radial(40, { rmax = 5 })
    local L = ls.blocks{ { T40, 0 }, { C, T40 } } -- H(41,1) = 0.25, H(1,41) not stored
    assert.are.equal("sparse", (L:storage()))
    assert.error_matches(function() ls.perturb_solve(L, ls.zeros(80)) end,
      "bad argument #1 to 'perturb_solve' (H0 is not Hermitian: |H(1,41) - conj(H(41,1))| = 0.25", 1, true)
    -- a sparse V with only the upper or only the lower entry of a pair stored
    local H80 = ls.radial(80, { rmax = 5 })
    local Vu = ls.blocks{ { T40, C:adj() }, { 0, T40 } }
    assert.are.equal("sparse", (Vu:storage()))
    assert.error_matches(function() ls.perturb_solve(H80, Vu) end,
      "bad argument #2 to 'perturb_solve' (V is not Hermitian: |H(1,41) - conj(H(41,1))| = 0.25", 1, true)
    assert.error_matches(function() ls.perturb_solve(H80, L) end,
      "bad argument #2 to 'perturb_solve' (V is not Hermitian: |H(41,1) - conj(H(1,41))| = 0.25", 1, true)
  end)
end)
