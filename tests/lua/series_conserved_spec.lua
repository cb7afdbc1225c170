-- ls.perturb when V does not leave the degenerate group (V conserves the quantity that labels
-- it): the group's first-order matrix is the whole answer, every higher order vanishes exactly.
-- Covers the short paths in csrc/core/series.c (W(1) written directly, Omega(1) empty,
-- eigenvalues-only groups with vanishing higher orders, real and complex).
local ls = require "levelshift"

-- open XX chain of L spins 1/2 on the Zeeman H0 = sum_i Sz_i; V = sum_i (e^{i phi} S+_i S-_i+1 + h.c.)/2
-- (phi = 0: Sx Sx + Sy Sy). V conserves total Sz, so the Sz = 0 levels form one group of H0.
local function chain(L, phi)
  local P = ls.product(ls.spin(0.5), L)
  local H0 = ls.sum(1, L, function(i) return P:site(i).Sz end)
  local c = ls.complex(math.cos(phi), math.sin(phi))
  local V = ls.sum(1, L - 1, function(i)
    local a, b = P:site(i), P:site(i + 1)
    if phi == 0 then return 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp) end
    return 0.5 * (c * (a.Sp * b.Sm) + ls.complex(math.cos(phi), -math.sin(phi)) * (a.Sm * b.Sp))
  end)
  return H0, V
end

-- Lieb, Schultz & Mattis, Ann. Phys. 16, 407 (1961): the open XX chain is a free-fermion chain
-- with hopping 1/2, one-particle energies cos(k pi / (L + 1)), k = 1..L; a level with N up spins
-- has the energy of N distinct occupied modes. For L = 4, N = 2: all sums of two of them.
-- (A phase e^{i phi} on every bond of an open chain is removed by a gauge transformation:
-- same spectrum; common practice.)
local function two_fermion_sums(L)
  local eps, out = {}, {}
  for k = 1, L do eps[k] = math.cos(k * math.pi / (L + 1)) end
  for i = 1, L do for j = i + 1, L do out[#out + 1] = eps[i] + eps[j] end end
  table.sort(out)
  return out
end

describe("ls.perturb, V conserving the group's quantum number", function()
  -- L = 4: levels ascending in H0: Sz = -2 (1), -1 (4), 0 (levels 6..11), +1 (4), +2 (1)
  local group = { 6, 7, 8, 9, 10, 11 }
  local ref = two_fermion_sums(4) -- -sqrt(5)/2, -1/2, 0, 0, 1/2, sqrt(5)/2

  for _, phi in ipairs { 0, 0.7 } do
    it("free-fermion first order, zero second order, energies only (phi = " .. phi .. ")", function()
      local H0, V = chain(4, phi)
      local s = ls.perturb(H0, V, { order = 3, levels = group, states = false })
      for i, lev in ipairs(group) do
        assert.is_true(math.abs(s:energy(lev, 0)) < 1e-15)
        assert.is_true(math.abs(s:energy(lev, 1) - ref[i]) < 1e-12, "E1 of level " .. lev)
        assert.are.equal(0, s:energy(lev, 2))
        assert.are.equal(0, s:energy(lev, 3))
      end
      assert.is_true(math.abs(ref[1] + math.sqrt(5) / 2) < 1e-14)
      -- the two zero modes (levels 8, 9) are never split: H0 + lambda V keeps them degenerate
      assert.are.equal(-1, s:info(8).split_order)
      assert.are.equal(-1, s:info(9).split_order)
      assert.are.equal(1, s:info(6).split_order)
      -- against exact diagonalization of H0 + lambda V
      assert.is_true(s:check(0.3).max_error < 1e-12)
    end)
  end

  it("with states: order-0 states are eigenvectors of V, corrections vanish", function()
    local H0, V = chain(4, 0)
    local s = ls.perturb(H0, V, { order = 3, levels = group })
    for i, lev in ipairs { 6, 7, 10, 11 } do
      local e1 = s:energy(lev, 1)
      local z0 = s:state(lev, 0)
      local r = V * z0 - e1 * z0
      local big = 0
      for q = 1, 16 do big = math.max(big, math.abs(r:get(q, 1))) end
      assert.is_true(big < 1e-12, "V z0 = E1 z0 for level " .. lev)
      -- exact eigenvectors do not depend on lambda here (H0 is constant on the group)
      local p1 = s:state(lev, 1)
      local m = 0
      for q = 1, 16 do m = math.max(m, math.abs(p1:get(q, 1))) end
      assert.is_true(m < 1e-12, "psi(1) of level " .. lev)
    end
    assert.is_true(s:check(0.3).max_error < 1e-12)
  end)

  for _, phi in ipairs { 0, 0.7 } do
    it("H0 = 0: the whole space is one group, P V P splits into the Sz sectors (phi = " .. phi .. ")", function()
      -- all 16 levels of the 4-site chain are degenerate; V conserves total Sz, so its matrix is
      -- block-diagonal (sectors of 1, 4, 6, 4, 1 states). Lieb, Schultz & Mattis (1961): the
      -- spectrum is every sum of N distinct modes cos(k pi / 5), N = 0..4.
      local _, V = chain(4, phi)
      local s = ls.perturb(ls.zeros(16, 16), V, { order = 2, states = false })
      local eps, ref16 = {}, {}
      for k = 1, 4 do eps[k] = math.cos(k * math.pi / 5) end
      for mask = 0, 15 do
        local e = 0
        for k = 1, 4 do if (mask >> (k - 1)) & 1 == 1 then e = e + eps[k] end end
        ref16[#ref16 + 1] = e
      end
      table.sort(ref16)
      for lev = 1, 16 do
        assert.is_true(math.abs(s:energy(lev, 1) - ref16[lev]) < 1e-12, "E1 of level " .. lev)
        assert.are.equal(0, s:energy(lev, 2))
      end
      assert.is_true(s:check(0.3).max_error < 1e-12)
    end)
  end

  it("a single level that V maps onto itself: E = E0 + lambda V_nn exactly", function()
    -- diagonal V: H0 + lambda V is diagonal, its levels are E0 + lambda V_nn (closed form)
    local H0 = ls.matrix { { 0, 0, 0 }, { 0, 1, 0 }, { 0, 0, 2 } }
    local V = ls.matrix { { 0.3, 0, 0 }, { 0, -0.2, 0 }, { 0, 0, 0.5 } }
    local s = ls.perturb(H0, V, { order = 4 })
    for lev, vnn in ipairs { 0.3, -0.2, 0.5 } do
      assert.are.equal(lev - 1, s:energy(lev, 0))
      assert.is_true(math.abs(s:energy(lev, 1) - vnn) < 1e-15)
      for k = 2, 4 do assert.are.equal(0, s:energy(lev, k)) end
      local p1 = s:state(lev, 1)
      for q = 1, 3 do assert.are.equal(0, p1:get(q, 1)) end
    end
  end)
end)
