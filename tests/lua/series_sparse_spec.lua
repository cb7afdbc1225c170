-- Series of a large sparse H0 that is not diagonal: levels from the Krylov
-- path, every order by a bordered sparse LU or by MINRES (the sparse path).
local ls = require "levelshift"

-- a dense copy: adding and removing a dense matrix forces dense storage
local function densify(H)
  local n = H:dim()
  local rows = {}
  for i = 1, n do
    rows[i] = {}
    for j = 1, n do rows[i][j] = 1 end
  end
  local D = ls.matrix(rows)
  return (H + D) - D
end

-- open XXZ chain sum J (Sx Sx + Sy Sy + delta Sz Sz) (+ h sum Sx)
local function xxz(L, delta, h)
  local P = ls.product(ls.spin(0.5), L)
  local H = ls.sum(1, L - 1, function(i)
    local a, b = P:site(i), P:site(i + 1)
    return 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp) + delta * a.Sz * b.Sz
  end)
  if h and h ~= 0 then H = H + h * ls.sum(1, L, function(i) return P:site(i).Sx end) end
  return H, P
end

local function staggered(P, L)
  return ls.sum(1, L, function(i) return ((-1) ^ i) * P:site(i).Sz end)
end

local function rel(a, b) return math.abs(a - b) / math.max(1, math.abs(b)) end

describe("series of a large sparse H0", function()
  it("equals the dense path on a 1024-state chain, level by level", function()
    local L = 10
    local H0, P = xxz(L, 0.55, 0.13)
    local V = staggered(P, L) + 0.21 * ls.sum(1, L, function(i) return P:site(i).Sy end) -- complex V
    local Hd = densify(H0)
    local s = ls.perturb(H0, V, { order = 6, levels = { 1, 3 } })
    local m = s:solver()
    assert.is_truthy(m == "bordered LU" or m == "MINRES")
    local sd = ls.perturb(Hd, V, { order = 6, levels = { 1, 3 } })
    for _, lev in ipairs { 1, 3 } do
      -- the dense path is the check (common practice: two independent
      -- routes to the same coefficients); scale: the order-k coefficient
      local scale = 0
      for k = 0, 6 do scale = math.max(scale, math.abs(sd:energy(lev, k))) end
      for k = 0, 6 do assert.near(sd:energy(lev, k), s:energy(lev, k), 1e-12 * scale) end
    end
    -- states: same vector up to the sign of the unperturbed state
    local p1 = s:state(1, 2)
    local q1 = sd:state(1, 2)
    local p0, q0 = s:state(1, 0), sd:state(1, 0)
    local sign = (p0:adj() * q0):get(1, 1) < 0 and -1 or 1
    local diff = p1 * sign - q1
    local dn = math.sqrt((diff:adj() * diff):get(1, 1))
    local qn = math.sqrt((q1:adj() * q1):get(1, 1))
    assert.is_true(dn < 1e-10 * qn)
  end)

  it("uses one bordered sparse LU for two coupled oscillators", function()
    -- H0 = sum n_i + 1/2 + c x1 x2 (normal modes at sqrt(1 -+ c): the exact
    -- ground energy (sqrt(1 + c) + sqrt(1 - c))/2; common practice), V = x1^4
    local o1, o2 = ls.oscillator(40), ls.oscillator(40)
    local P = ls.product(o1, o2)
    local c = 0.137
    local x1, x2 = P:site(1).x, P:site(2).x
    local H0 = P:site(1).number + P:site(2).number + 1 + c * x1 * x2
    local V = x1 ^ 4
    local s = ls.perturb(H0, V, { order = 4, levels = { 1, 2 } })
    assert.are.equal("bordered LU", (s:solver()))
    assert.near((math.sqrt(1 + c) + math.sqrt(1 - c)) / 2, s:energy(1, 0), 1e-12)
    local sd = ls.perturb(densify(H0), V, { order = 4, levels = { 1, 2 } })
    for _, lev in ipairs { 1, 2 } do
      for k = 0, 4 do assert.is_true(rel(s:energy(lev, k), sd:energy(lev, k)) < 1e-11) end
    end
  end)

  it("lifts a degenerate triplet found by the Krylov path", function()
    -- the first excitation of the even open Heisenberg chain is a triplet
    -- (total spin 1: three Sz sectors, common practice); a field along z,
    -- site-dependent, splits it at first order by Sz
    local L = 10
    local H0, P = xxz(L, 1.0)
    local V = ls.sum(1, L, function(i) return (0.3 + 0.05 * i) * P:site(i).Sz end)
    -- groups = "exact": at lambda_max = 1 this field couples the triplet
    -- to the singlet below it strongly enough to join them into one model
    -- space; the subject here is the exact degeneracy
    local s = ls.perturb(H0, V, { order = 4, levels = { 2 }, groups = "exact" })
    local sd = ls.perturb(densify(H0), V, { order = 4, levels = { 2 }, groups = "exact" })
    local g = s:groups()
    local found
    for _, grp in ipairs(g) do
      if #grp.members == 3 then found = grp end
    end
    assert.is_truthy(found)
    for _, lev in ipairs { 2, 3, 4 } do
      for k = 0, 4 do assert.near(sd:energy(lev, k), s:energy(lev, k), 1e-10) end
    end
    -- first order: the triplet's Sz = -1, 0, +1 members shift by -m', 0, +m'
    -- with m' = <V> in the Sz = 1 member (symmetric about 0; common practice)
    assert.near(0, s:energy(3, 1), 1e-10)
    assert.near(-s:energy(2, 1), s:energy(4, 1), 1e-10)
  end)

  it("converges to the Krylov exact level like lambda^10 on a 16384-state chain (MINRES)", function()
    -- even L: reflection maps V to -V, so E(lambda) is even and the error of
    -- the order-8 sum falls like lambda^10 (common practice)
    local L = 14
    local H0, P = xxz(L, 0.5)
    local V = staggered(P, L)
    local s = ls.perturb(H0, V, { order = 8, levels = { 1 }, states = false })
    local method = s:solver()
    assert.is_truthy(method == "MINRES" or method == "bordered LU")
    local function err(lam)
      local E = ls.eigen(H0 + lam * V, { count = 1, vectors = false, method = "krylov" })
      return math.abs(s:at(1, lam) - E[1])
    end
    -- (the coefficients grow ~100-fold every two orders: radius ~ 0.1)
    local e1, e2 = err(0.03), err(0.015)
    assert.is_true(e1 < 1e-5)
    local slope = math.log(e1 / e2) / math.log(2)
    assert.is_true(slope > 9.0 and slope < 11.5, "slope " .. slope)
    -- odd orders vanish (the same symmetry)
    for _, k in ipairs { 1, 3, 5, 7 } do assert.near(0, s:energy(1, k), 1e-8 * math.abs(s:energy(1, k + 1))) end
  end)

  it("gets energies by Wigner's 2n+1 rule with half the solves when no states are kept", function()
    -- source: E. P. Wigner (1935); Hirschfelder, Byers Brown, Epstein, Adv.
    -- Quantum Chem. 1, 255 (1964), sec. 5: psi(0..n) fix E(2n+1); checked
    -- against the plain recursion of the same series (complex V)
    local L = 10
    local H0, P = xxz(L, 0.5, 0.11)
    local V = staggered(P, L) + 0.2 * ls.sum(1, L, function(i) return P:site(i).Sy end)
    for _, K in ipairs { 3, 8, 9 } do
      -- groups = "exact": the subject is one level's own series (at
      -- lambda_max = 1 this V would join level 2 with its neighbours)
      local a = ls.perturb(H0, V, { order = K, levels = { 2 }, states = false, groups = "exact" })
      local b = ls.perturb(H0, V, { order = K, levels = { 2 }, groups = "exact" })
      local _, na = a:solver()
      local _, nb = b:solver()
      assert.are.equal(K // 2, na)
      assert.are.equal(K, nb)
      for k = 0, K do
        -- odd orders vanish up to rounding of their neighbours' size
        local scale = 1
        for j = math.max(0, k - 1), math.min(K, k + 1) do scale = math.max(scale, math.abs(b:energy(2, j))) end
        assert.near(b:energy(2, k), a:energy(2, k), 1e-12 * scale)
      end
    end
  end)

  it("works for a complex H0 (a Dzyaloshinskii-Moriya chain)", function()
    local L = 10
    local H0, P = xxz(L, 0.8, 0.17)
    H0 = H0 + ls.sum(1, L - 1, function(i)
      local a, b = P:site(i), P:site(i + 1)
      return 0.31 * (a.Sx * b.Sy - a.Sy * b.Sx)
    end)
    local V = staggered(P, L)
    local s = ls.perturb(H0, V, { order = 5, levels = { 1 } })
    local sd = ls.perturb(densify(H0), V, { order = 5, levels = { 1 } })
    for k = 0, 5 do assert.is_true(rel(s:energy(1, k), sd:energy(1, k)) < 1e-10) end
  end)

  it("prints its report and checks against exact levels", function()
    local L = 10
    local H0, P = xxz(L, 0.5, 0.1)
    local s = ls.perturb(H0, staggered(P, L), { order = 4, levels = { 1 } })
    local text = tostring(s)
    assert.matches("perturbation series: 1024 states, order 4", text, 1, true)
    -- s:check asks the Krylov path for the checked levels only
    -- (order 4: the error is the order-6 term, E(6) lambda^6 ~ 2e-8 here)
    local c1, c2 = s:check(0.01), s:check(0.005)
    assert.are.equal(1, #c1.levels)
    assert.is_true(c1.max_error < 1e-7)
    local slope = math.log(c1.max_error / c2.max_error) / math.log(2)
    assert.is_true(slope > 5.5 and slope < 6.6, "slope " .. slope)
    local big = xxz(14, 0.5)
    local sb = ls.perturb(big, staggered(select(2, xxz(14, 0.5)), 14), { order = 6, levels = { 1 } })
    assert.is_true(sb:check(0.005).max_error < 1e-7)
  end)
end)
