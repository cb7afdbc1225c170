-- Nearly degenerate levels: model spaces formed by ls.perturb (mspace.c),
-- each member's value from its space's effective Hamiltonian.
local ls = require "levelshift"

local function binom_half(j) -- binom(1/2, j)
  local c = 1
  for i = 0, j - 1 do c = c * (0.5 - i) / (i + 1) end
  return c
end

describe("nearly degenerate levels", function()
  -- Two close pairs whose exact levels are roots of quadratics (derived
  -- here; common practice): H = h1 (x) 1 + 1 (x) h2 with
  --   h1 = diag(0, W) + lambda u sigma_x   (the far pair, gap W)
  --   h2 = diag(0, dl) + lambda v sigma_x  (the close pair, gap dl << v)
  -- so H0 = diag(0, dl, W, W + dl) in the order (i, j) = (0,0), (0,1),
  -- (1,0), (1,1), and the levels are e1(-+) + e2(-+) with
  --   e1(-+) = W/2 -+ sqrt(W^2/4 + lambda^2 u^2),
  --   e2(-+) = dl/2 -+ sqrt(dl^2/4 + lambda^2 v^2).
  -- The lower pair {1, 2} spans |e1-(lambda)> (x) C^2 exactly, so its
  -- effective Hamiltonian is e1-(lambda) 1 + h2; truncated at order K its
  -- error is the Taylor remainder of e1-(lambda) alone:
  --   e1- = W/2 - (W/2) sum_j binom(1/2, j) (4 lambda^2 u^2 / W^2)^j.
  local W, dl, u, v = 5.0, 0.05, 1.0, 0.3
  local H0 = ls.matrix { { 0, 0, 0, 0 }, { 0, dl, 0, 0 }, { 0, 0, W, 0 }, { 0, 0, 0, W + dl } }
  local V = ls.matrix { { 0, v, u, 0 }, { v, 0, 0, u }, { u, 0, 0, v }, { 0, u, v, 0 } }
  local function exact(lambda)
    local r1 = math.sqrt(W * W / 4 + lambda * lambda * u * u)
    local r2 = math.sqrt(dl * dl / 4 + lambda * lambda * v * v)
    return { W / 2 - r1 + dl / 2 - r2, W / 2 - r1 + dl / 2 + r2, W / 2 + r1 + dl / 2 - r2, W / 2 + r1 + dl / 2 + r2 }
  end
  local function e1m_taylor(lambda, K) -- e1-(lambda) summed to order K in lambda
    local acc, x = 0, 4 * lambda * lambda * u * u / (W * W)
    for j = 1, K // 2 do acc = acc - W / 2 * binom_half(j) * x ^ j end
    return acc
  end

  it("joins each close pair into a model space and says why", function()
    local s = ls.perturb(H0, V, { order = 4 })
    local g = s:groups()
    assert.are.equal(2, #g)
    assert.are.same({ 1, 2 }, g[1].members)
    assert.are.same({ 3, 4 }, g[2].members)
    assert.are.equal("near", g[1].kind)
    assert.are.same({ { 1 }, { 2 } }, g[1].subgroups)
    assert.truthy(g[1].why:find("levels 1 and 2: gap 0.05 below 4 x lambda_max (1) x coupling 0.3 = 1.2", 1, true),
      g[1].why)
    assert.are.equal(1, s:info(1).model_space)
    -- kappa between the pairs is u (block u * identity): 5 is not below 4 x 1 x 1
    assert.are.equal("", s:notes())
  end)

  it("errors equal the Taylor remainder of the far pair and fall like lambda^(K+1)", function()
    for K = 2, 8 do
      local s = ls.perturb(H0, V, { order = K })
      for _, lam in ipairs { 1.0, 0.5 } do
        local E = exact(lam)
        local r1 = math.sqrt(W * W / 4 + lam * lam * u * u)
        local rem = (W / 2 - r1) - e1m_taylor(lam, K) -- what the truncation leaves out
        for lev = 1, 2 do
          assert.near(E[lev] - rem, s:at(lev, lam), 1e-12)
        end
      end
      local e1 = math.abs(s:at(1, 1.0) - exact(1.0)[1])
      local e2 = math.abs(s:at(1, 0.5) - exact(0.5)[1])
      -- e1- is even in lambda: the remainder starts at lambda^(K+1) for odd
      -- K and at lambda^(K+2) for even K
      assert.is_true(e1 / e2 > 0.8 * 2 ^ (K + 1), string.format("K = %d: ratio %g", K, e1 / e2))
    end
  end)

  it("beats the level-by-level series, which diverges for the close pair", function()
    local se = ls.perturb(H0, V, { order = 6, groups = "exact" })
    local sa = ls.perturb(H0, V, { order = 6 })
    local E = exact(1.0)
    assert.is_true(math.abs(se:at(1, 1.0) - E[1]) > 1) -- 2 lambda v / dl = 12: far outside its radius
    assert.is_true(math.abs(sa:at(1, 1.0) - E[1]) < 1e-4)
    -- the plain coefficients are the same either way (s:energy is the RS series)
    for k = 0, 6 do assert.near(se:energy(1, k), sa:energy(1, k), 1e-9 * math.max(1, math.abs(se:energy(1, k)))) end
    -- s:at(level, lambda, k) truncates the effective Hamiltonian at order k
    local r1 = math.sqrt(W * W / 4 + u * u)
    assert.near(E[1] - ((W / 2 - r1) - e1m_taylor(1.0, 2)), sa:at(1, 1.0, 2), 1e-12)
  end)

  it("gives the terms of a space's effective Hamiltonian", function()
    local s = ls.perturb(H0, V, { order = 4 })
    -- order 0: diag(0, dl); order 1: v sigma_x; order 2: -u^2/W on the diagonal
    -- (second order of e1-; the h2 part is exact at first order)
    local t0, t1, t2 = s:group_term(1, 0), s:group_term(1, 1), s:group_term(1, 2)
    assert.near(0, t0:get(1, 1), 1e-15)
    assert.near(dl, t0:get(2, 2), 1e-15)
    assert.near(v, math.abs(t1:get(1, 2)), 1e-14)
    assert.near(0, t1:get(1, 1), 1e-14)
    assert.near(-u * u / W, t2:get(1, 1), 1e-12)
    assert.near(-u * u / W, t2:get(2, 2), 1e-12)
    local r = s:radius(1)
    assert.is_true(r > 1) -- the far pair's branch points at lambda = +-i W/(2u) = 2.5i
  end)

  it("follows Jaynes-Cummings doublets near resonance exactly at first order", function()
    -- H = w a^dag a + (wq/2) sigma_z + g (a sigma+ + a^dag sigma-) (rotating
    -- wave): the doublet {|e, n>, |g, n+1>} has the levels
    -- w (n + 1/2) -+ sqrt(Delta^2/4 + g^2 (n + 1)), Delta = wq - w
    -- (Jaynes & Cummings, Proc. IEEE 51, 89 (1963)); the ground |g, 0> is
    -- -wq/2. A detuning below g makes each doublet nearly degenerate.
    local w, wq, g = 1.0, 1.04, 0.1
    local o = ls.oscillator(12)
    local P = ls.product(o, ls.spin(0.5))
    local A, Sg = P:site(1), P:site(2)
    local H0 = w * A.number + wq * Sg.Sz
    local V = g * (A.lower * Sg.Sp + A.raise * Sg.Sm)
    for K = 1, 3 do
      local s = ls.perturb(H0, V, { order = K, levels = { 1, 2, 3, 4, 5, 6, 7 } })
      assert.near(-wq / 2, s:at(1, 1.0), 1e-12)
      for n = 0, 2 do
        local r = math.sqrt((wq - w) ^ 2 / 4 + g * g * (n + 1))
        assert.near(w * (n + 0.5) - r, s:at(2 + 2 * n, 1.0), 1e-12)
        assert.near(w * (n + 0.5) + r, s:at(3 + 2 * n, 1.0), 1e-12)
        assert.are.equal("near", s:groups()[2 + n].kind)
      end
    end
  end)

  it("meets the exact levels of the spin_defect recipe at its invented defaults", function()
    -- order 2 within 0.1 MHz and order 4 within 1 kHz of exact
    -- diagonalization (LAPACK), levels 3..6 in one model space
    local m = ls.recipe("spin_defect")
    local E = ls.eigen(m.H0 + m.V, { vectors = false })
    for _, spec in ipairs { { 2, 0.1 }, { 4, 1e-3 } } do
      local s = ls.perturb(m.H0, m.V, { order = spec[1] })
      for lev = 1, 6 do
        assert.is_true(math.abs(s:at(lev, 1) - E[lev]) < spec[2],
          string.format("order %d level %d: %g", spec[1], lev, s:at(lev, 1) - E[lev]))
      end
      assert.are.equal(1, s:info(3).model_space)
    end
  end)

  it("meets the flagship's levels at 0.9 mT to 1 Hz at order 6", function()
    -- the model of examples/flagship.lua (invented spin-1 defect, GHz)
    local P = ls.product(ls.spin(1), ls.spin(0.5))
    local S, I = P:site(1), P:site(2)
    local H0 = 2.740 * S.Sz ^ 2 + 0.004 * (S.Sx ^ 2 - S.Sy ^ 2) + 0.0126 * (S.Sx * I.Sx + S.Sy * I.Sy + S.Sz * I.Sz)
    local tilt = math.rad(25)
    local V = 2.0031 * 13.996244936e-3 * (math.sin(tilt) * S.Sx + math.cos(tilt) * S.Sz)
    local s = ls.perturb(H0, V, { order = 6 })
    local E = ls.eigen(H0 + 0.9 * V, { vectors = false })
    for lev = 1, 6 do assert.is_true(math.abs(s:at(lev, 0.9) - E[lev]) < 1e-9, "level " .. lev) end
    -- s:check agrees and warns about nothing
    local c = s:check(0.9)
    assert.is_true(c.max_error < 1e-9)
    for _, row in ipairs(c.levels) do assert.is_nil(row.warning) end
  end)

  it("takes groups by hand and refuses groups that cannot be model spaces", function()
    local m = ls.recipe("spin_defect")
    local s = ls.perturb(m.H0, m.V, { order = 2, groups = { { 3, 4, 5, 6 } } })
    local g = s:groups()
    assert.are.equal("near", g[2].kind)
    assert.is_true(g[2].hand)
    assert.are.equal("chosen by hand (groups[1])", g[2].why)
    local function errs(pat, opts)
      assert.error_matches(function() ls.perturb(m.H0, m.V, opts) end, pat, 1, true)
    end
    errs("groups[1] cuts the degenerate group of levels 3..4: level 4 must come along", { groups = { { 3, 5, 6 } } })
    errs("groups[2] and groups[1] overlap (level 4)", { groups = { { 3, 4 }, { 4, 5, 6 } } })
    errs("groups[1] names level 3 twice", { groups = { { 3, 3, 4 } } })
    errs("groups[1][2] must be a level from 1 to 6", { groups = { { 3, 7 } } })
    errs("option 'groups' must be \"auto\", \"exact\" or a list of level lists, got \"near\"", { groups = "near" })
    errs("option 'groups' is an empty list", { groups = {} })
    errs("lambda_max must be a positive finite number, got 0", { lambda_max = 0 })
    errs("near_factor must be a finite number >= 0, got -1", { near_factor = -1 })
    errs("near_max must be from 2 to 4096, got 1", { near_max = 1 })
    -- group_term of an entry that is not a model space
    local se = ls.perturb(m.H0, m.V, { order = 2, groups = "exact" })
    assert.error_matches(function() se:group_term(1, 1) end, "group 1 is not a model space", 1, true)
  end)

  it("sizes the spaces by lambda_max and says when a closure is too large", function()
    local m = ls.recipe("spin_defect")
    -- at a hundredth of the field the pairs stay apart
    local s = ls.perturb(m.H0, m.V, { order = 2, lambda_max = 0.01 })
    for _, g in ipairs(s:groups()) do assert.are_not.equal("near", g.kind) end
    -- and the check at the full field names the neighbour left outside
    local row = s:check(1).levels[3]
    assert.truthy(row.warning and row.warning:find("because lambda_max = 0.01 < |lambda| = 1", 1, true), row.warning)
    -- the quartic oscillator couples every even level to the next: the
    -- closure grows past near_max and the rule is tightened, with a note
    local o = ls.oscillator(30)
    local sq = ls.perturb(o.number + 0.5, o.x ^ 4, { order = 4, levels = { 1 } })
    assert.truthy(sq:notes():find("joins more than 8 levels from level 1 on: near_factor lowered from 4", 1, true),
      sq:notes())
  end)

  -- High field: H0 = Zeeman, V = A S.I (23Na, I = 3/2, 1 T; A = 885.813 MHz
  -- and the nuclear g 1.4784 from memory: Arimondo, Inguscio & Violino, Rev.
  -- Mod. Phys. 49, 31 (1977)). First order A m_S m_I reverses the order of
  -- the upper manifold's four levels, so the exact level of the same rank is
  -- the wrong one; s:check pairs by the series states' overlaps. The levels
  -- themselves: the Breit-Rabi formula (Breit & Rabi, Phys. Rev. 38, 2082
  -- (1931)), E = -A/4 + g_I' B m +- (dE/2) sqrt(1 + 4 m x / (2I + 1) + x^2),
  -- dE = A (I + 1/2), x = (g mu_B + g_n mu_N) B / dE, g_I' B = -g_n mu_N B,
  -- and A I/2 +- (g mu_B B / 2 - g_n mu_N B I) for the stretched states.
  it("pairs each level with the exact level it continues into (high-field hyperfine)", function()
    local A, I, gn = 885.813, 1.5, 1.4784
    local m = ls.recipe("hyperfine", { nuclear_spin = I, hyperfine = A, nuclear_g = gn, field = 1 })
    local s = ls.perturb(m.V, m.H0, { order = 6 })
    local c = s:check(1)
    assert.equal("overlap", c.pairing)
    assert.is_true(c.max_error < 1e-3, c.max_error)
    local perm = false
    for _, r in ipairs(c.levels) do
      assert.is_nil(r.warning) -- V couples no crossing pair: nothing to warn about
      assert.is_true(r.overlap > 0.99)
      if r.exact_level ~= r.level then perm = true end
    end
    assert.is_true(perm) -- the ranks did change
    assert.is_nil(tostring(s):find("warnings:", 1, true))
    -- the closed form
    local muB = ls.units.convert(1, "T", "MHz")
    local muN = muB * ls.units.mu_N / ls.units.mu_B
    local g = 2.00231930436256
    local dE, br = A * (I + 0.5), {}
    local x = (g * muB + gn * muN) / dE
    for mf = -(I - 0.5), I - 0.5 do
      for _, sg in ipairs { -1, 1 } do
        br[#br + 1] = -A / 4 - gn * muN * mf + sg * dE / 2 * math.sqrt(1 + 4 * mf * x / (2 * I + 1) + x * x)
      end
    end
    for _, sg in ipairs { -1, 1 } do br[#br + 1] = A * I / 2 + sg * (g * muB / 2 - gn * muN * I) end
    table.sort(br)
    local got = {}
    for lev = 1, 8 do got[lev] = s:at(lev, 1) end
    table.sort(got)
    for i = 1, 8 do assert.near(br[i], got[i], 1e-3) end
    -- without states the pairing falls back to ranks, and says so
    local s0 = ls.perturb(m.V, m.H0, { order = 6, states = false })
    local c0 = s0:check(1)
    assert.equal("rank", c0.pairing)
    assert.is_true(c0.max_error > 100)
  end)

  -- Breit-Rabi (Breit & Rabi, Phys. Rev. 38, 2082 (1931)): every level but
  -- the stretched two holds sqrt(1 + 4 m x / (2I + 1) + x^2), whose branch
  -- points lie on |x| = 1 for |m| <= 1 (I = 3/2), so the Zeeman series in B
  -- has radius dE / (g mu_B + g_n mu_N) = 63.19 mT for 23Na (constants as
  -- above). s:radius finds it and says how sure it is; s:check warns past it.
  it("estimates the radius of the 23Na Zeeman series and warns beyond it", function()
    local A, I, gn = 885.813, 1.5, 1.4784
    local m = ls.recipe("hyperfine", { nuclear_spin = I, hyperfine = A, nuclear_g = gn, field = 1, field_unit = "mT" })
    local muB = ls.units.convert(1, "mT", "MHz")
    local R0 = A * (I + 0.5) / (2.00231930436256 * muB + gn * muB * ls.units.mu_N / ls.units.mu_B)
    assert.near(63.19, R0, 0.01)
    local s = ls.perturb(m.H0, m.V, { order = 40 })
    local seen = 0
    for lev = 1, 8 do
      local r, note = s:radius(lev)
      if r then
        seen = seen + 1
        assert.is_true(math.abs(r - R0) < 0.08 * R0, string.format("level %d: %g", lev, r))
        assert.truthy(note:find("agree within", 1, true), note)
      else
        assert.truthy(note:find("coefficients vanish", 1, true)) -- the stretched states: linear in B
      end
    end
    assert.equal(6, seen)
    -- at 75 mT every level that is not linear in B is off and says so
    -- (by the radius, or first by the neighbour rule at this lambda)
    local c = s:check(75)
    for _, row in ipairs(c.levels) do
      if math.abs(row.error) > 1 then assert.is_string(row.warning) end
    end
    -- groups by hand (no neighbour rule): the radius rule alone
    local sh = ls.perturb(m.H0, m.V, { order = 40, groups = { { 1, 2, 3 }, { 4, 5, 6, 7, 8 } } })
    local warned = 0
    for _, row in ipairs(sh:check(75).levels) do
      if row.warning and row.warning:find("beyond the series' estimated radius", 1, true) then warned = warned + 1 end
    end
    assert.is_true(warned >= 1)
    for _, row in ipairs(s:check(30).levels) do assert.is_nil(row.warning) end
  end)
  it("takes a wanted degenerate group larger than the model-space cap (XX chain, half filling)", function()
    -- H0 = sum Sz_i, V = XX coupling of an open 6-site chain: the Sz = 0
    -- level (20 states) is wanted whole; V keeps Sz, so the first-order
    -- energies are the XX chain's half-filling levels, sums of three of
    -- the free-fermion energies cos(pi k / 7), k = 1..6 (Lieb, Schultz,
    -- Mattis, Ann. Phys. 16, 407 (1961)), and the second order vanishes.
    -- (A group alone past the cap once read V's columns that were never
    -- loaded: a crash.)
    local L = 6
    local P = ls.product(ls.spin(0.5), L)
    local H0 = ls.sum(1, L, function(i) return P:site(i).Sz end)
    local V = ls.sum(1, L - 1, function(i)
      local a, b = P:site(i), P:site(i + 1)
      return 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp)
    end)
    -- levels sorted by energy: Sz = -3, -2, -1 hold 1 + 6 + 15 = 22 below
    local group = {}
    for i = 1, 20 do group[i] = 22 + i end
    local s = ls.perturb(H0, V, {order = 2, levels = group, states = false})
    local eps = {}
    for k = 1, L do eps[k] = math.cos(math.pi * k / (L + 1)) end
    local want = {}
    for a = 1, L do for b = a + 1, L do for c = b + 1, L do
      want[#want + 1] = eps[a] + eps[b] + eps[c]
    end end end
    table.sort(want)
    local got = {}
    for i = 1, 20 do got[i] = s:energy(group[i], 1) end
    table.sort(got)
    for i = 1, 20 do
      assert.is_true(math.abs(got[i] - want[i]) <= 1e-12, i .. ": " .. got[i] .. " vs " .. want[i])
      assert.is_true(math.abs(s:energy(group[i], 2)) <= 1e-12)
    end
  end)
end)
