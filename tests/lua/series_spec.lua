-- Perturbation series (ls.perturb): RS to any order, degenerate groups.
local ls = require "levelshift"

local function rel(a, b) return math.abs(a - b) / math.max(math.abs(b), 1e-300) end

describe("ls.perturb", function()
  it("quartic oscillator ground-state series", function()
    local B = ls.oscillator(60)
    local H0 = B:diag(function(l) return l.n + 0.5 end)
    local s = ls.perturb(H0, B.x ^ 4, { order = 8, levels = { 1 } })
    -- Bender & Wu, Phys. Rev. 184, 1231 (1969), coefficients of E(lambda) for p^2/2 + x^2/2 + lambda x^4
    local ref = { [0] = 1 / 2, 3 / 4, -21 / 8, 333 / 16, -30885 / 128, 916731 / 256 }
    for k = 0, 5 do assert.is_true(rel(s:energy(1, k), ref[k]) < 1e-10, "order " .. k) end
    assert.is_true(H0:storage() == "sparse") -- diagonal H0 keeps V sparse (common practice)
  end)

  it("quartic oscillator to 8th order against the Bender-Wu recursion in exact rationals", function()
    -- Bender & Wu, Phys. Rev. 184, 1231 (1969): psi = exp(-x^2/2) sum_n lambda^n sum_j B(n,j) x^(2j),
    -- B(0,j) = delta_j0, B(n,0) = 0 (n >= 1); the x^(2j) coefficient of the Schroedinger equation for
    -- p^2/2 + x^2/2 + lambda x^4 gives, for j = 2n .. 1,
    --   2j B(n,j) = (j+1)(2j+1) B(n,j+1) - B(n-1,j-2) + sum_{m=1..n-1} E(m) B(n-m,j),   E(n) = -B(n,1).
    -- Exact rationals in 64-bit integers (intermediates stay below 2^42 to n = 8).
    local function gcd(a, b) a, b = math.abs(a), math.abs(b); while b ~= 0 do a, b = b, a % b end; return a end
    local function q(a, b)
      b = b or 1
      assert(math.abs(a) < 2 ^ 62 and math.abs(b) < 2 ^ 62, "rational overflow")
      if b < 0 then a, b = -a, -b end
      local g = gcd(a, b); if g == 0 then return { 0, 1 } end
      return { a // g, b // g }
    end
    local function mul(x, y)
      if x[1] == 0 or y[1] == 0 then return q(0) end
      local g1, g2 = gcd(x[1], y[2]), gcd(y[1], x[2])
      return q((x[1] // g1) * (y[1] // g2), (x[2] // g2) * (y[2] // g1))
    end
    local function add(x, y)
      local g = gcd(x[2], y[2])
      return q(x[1] * (y[2] // g) + y[1] * (x[2] // g), x[2] * (y[2] // g))
    end
    local N = 8
    local B = { [0] = { [0] = q(1) } }
    local Eq = { [0] = q(1, 2) }
    local function b(n, j) return (B[n] and B[n][j]) or q(0) end
    for n = 1, N do
      B[n] = { [0] = q(0) }
      for j = 2 * n, 1, -1 do
        local v = add(mul(q((j + 1) * (2 * j + 1)), b(n, j + 1)), mul(q(-1), b(n - 1, j - 2)))
        for m = 1, n - 1 do v = add(v, mul(Eq[m], b(n - m, j))) end
        B[n][j] = mul(v, q(1, 2 * j))
      end
      Eq[n] = mul(q(-1), B[n][1])
    end
    assert.are.same({ -30885, 128 }, Eq[4]) -- the recursion itself against the published E(4)
    local B0 = ls.oscillator(80)
    local s = ls.perturb(B0.number + 0.5, B0.x ^ 4, { order = N, levels = { 1 } })
    for k = 0, N do
      local want = Eq[k][1] / Eq[k][2]
      assert.is_true(rel(s:energy(1, k), want) < 1e-10, ("order %d: %.17g vs %.17g"):format(k, s:energy(1, k), want))
    end
  end)

  it("order 120: the two-level square root, binomial coefficients", function()
    -- E = (D - sqrt(D^2 + 4 g^2 lambda^2))/2 for H0 = diag(0, D), V = g sigma_x (closed form of the
    -- 2x2 eigenvalue, common practice); sqrt(1 + x) = sum_j binom(1/2, j) x^j (binomial series,
    -- Abramowitz & Stegun 3.6.8), so E(2j) = -(D/2) binom(1/2, j) (2g/D)^(2j), E(odd) = 0.
    local g, D = 0.5, 1.0
    local s = ls.perturb(ls.matrix { { 0, 0 }, { 0, D } }, ls.matrix { { 0, g }, { g, 0 } }, { order = 120 })
    local bin = 1
    for j = 1, 60 do
      bin = bin * (0.5 - j + 1) / j
      local want = -(D / 2) * bin * (2 * g / D) ^ (2 * j)
      assert.is_true(rel(s:energy(1, 2 * j), want) < 1e-12, "order " .. 2 * j)
      assert.is_true(math.abs(s:energy(1, 2 * j - 1)) < 1e-15)
      assert.is_true(rel(s:energy(2, 2 * j), -want) < 1e-12)
    end
    -- every coefficient finite at order 1000 too (|E(k)| ~ k^(-3/2) here)
    local big = ls.perturb(ls.matrix { { 0, 0 }, { 0, D } }, ls.matrix { { 0, g }, { g, 0 } }, { order = 1000, levels = { 1 } })
    local e = big:energy(1, 1000)
    assert.is_true(e == e and math.abs(e) < 1e-3 and e ~= 0)
  end)

  it("normalized states: unit norm and the exact eigenvector to O(lambda^(K+1))", function()
    -- normalized state phi = psi / |psi| with phase <n|phi> > 0 (series power rule for
    -- (1 + s)^(-1/2), Knuth, TAOCP vol. 2, sec. 4.7); exact vector from diagonalization (common practice)
    local H0 = ls.matrix { { 0, 0, 0 }, { 0, 1.3, 0 }, { 0, 0, 2.1 } }
    local V = ls.matrix { { 0.2, 0.5, -0.3 }, { 0.5, -0.1, 0.4 }, { -0.3, 0.4, 0.3 } }
    local K = 4
    local sn = ls.perturb(H0, V, { order = K, levels = { 1 }, normalized = true })
    local si = ls.perturb(H0, V, { order = K, levels = { 1 } })
    local errs = {}
    for t, lam in ipairs { 0.02, 0.01 } do
      local _, U = ls.eigen(H0 + lam * V)
      local sign = (U:get(1, 1)) > 0 and 1 or -1
      local phi, psi = { 0, 0, 0 }, { 0, 0, 0 }
      for k = 0, K do
        local a, b = sn:state(1, k), si:state(1, k)
        for i = 1, 3 do
          phi[i] = phi[i] + lam ^ k * (a:get(i, 1))
          psi[i] = psi[i] + lam ^ k * (b:get(i, 1))
        end
      end
      local e, norm = 0, 0
      for i = 1, 3 do
        e = math.max(e, math.abs(phi[i] - sign * (U:get(i, 1))))
        norm = norm + phi[i] ^ 2
      end
      errs[t] = e
      assert.is_true(math.abs(norm - 1) < 50 * lam ^ (K + 1))
      assert.are.equal(1, psi[1]) -- intermediate normalization: <1|psi> = 1 exactly
    end
    local ratio = errs[1] / errs[2]
    assert.is_true(ratio > 0.6 * 2 ^ (K + 1) and ratio < 1.5 * 2 ^ (K + 1), "ratio " .. ratio)
  end)

  it("degenerate members go on to higher orders: energies and states against exact diagonalization", function()
    -- common practice: a truncation error O(lambda^(K+1)) for energies and O(lambda^(m+1)) for states
    -- known to order m, so halving lambda divides the error by ~2^(K+1), ~2^(m+1)
    local H0 = ls.matrix { { 0, 0, 0, 0, 0 }, { 0, 0, 0, 0, 0 }, { 0, 0, 1, 0, 0 }, { 0, 0, 0, 1.7, 0 }, { 0, 0, 0, 0, 2.3 } }
    local rows = {}
    for i = 1, 5 do rows[i] = {} end
    for i = 1, 5 do
      for j = i, 5 do
        local a = math.sin(1.7 * i + 2.3 * j) * 0.5 + 0.1
        rows[i][j], rows[j][i] = a, a
      end
    end
    local V = ls.matrix(rows)
    for K = 2, 4 do
      local s = ls.perturb(H0, V, { order = K })
      assert.are.equal(1, s:info(1).split_order)
      for lev = 1, 2 do
        local m = s:info(lev).state_orders
        assert.are.equal(K - 1, m) -- split at first order: states to K - 1
        local ee, es = {}, {}
        local z0 = s:state(lev, 0)
        for t, lam in ipairs { 0.02, 0.01 } do
          local E, U = ls.eigen(H0 + lam * V)
          ee[t] = math.abs(s:at(lev, lam) - E[lev])
          local ov = 0
          for i = 1, 5 do ov = ov + (z0:get(i, 1)) * (U:get(i, lev)) end
          local e = 0
          local ser = { 0, 0, 0, 0, 0 }
          for k = 0, m do
            local p = s:state(lev, k)
            for i = 1, 5 do ser[i] = ser[i] + lam ^ k * (p:get(i, 1)) end
          end
          for i = 1, 5 do e = math.max(e, math.abs(ser[i] - (U:get(i, lev)) / ov)) end
          es[t] = e
        end
        local re, rs = ee[1] / ee[2], es[1] / es[2]
        assert.is_true(re > 0.6 * 2 ^ (K + 1) and re < 1.5 * 2 ^ (K + 1), ("K=%d level %d energy ratio %g"):format(K, lev, re))
        assert.is_true(rs > 0.6 * 2 ^ (m + 1) and rs < 1.5 * 2 ^ (m + 1), ("K=%d level %d state ratio %g"):format(K, lev, rs))
      end
    end
    local s = ls.perturb(H0, V, { order = 3 })
    assert.error_matches(function() s:state(1, 3) end,
      "bad argument #2 to 'state' (level 1 was split from its degenerate group at order 1: its state is available to order 2)", 1, true)
    local e = ls.perturb(H0, V, { order = 3, states = false })
    assert.are.equal(s:energy(1, 3), e:energy(1, 3))
    assert.error_matches(function() e:state(1, 0) end, "no state corrections were kept (perturb option states = false)", 1, true)
  end)

  it("a few levels of a dense H0: bordered solves agree with the full eigenbasis", function()
    -- two routes to the same RS series (METHODS.md sec. 1: bordered system, Dalgarno & Lewis,
    -- Proc. R. Soc. A 233, 70 (1955)); checked against exact diagonalization (common practice)
    local n = 6
    local rows = {}
    for i = 1, n do rows[i] = {} end
    for i = 1, n do
      for j = i, n do
        local a = (i == j) and (1.3 * i) or 0.3 * math.sin(1.1 * i + 0.7 * j)
        rows[i][j], rows[j][i] = a, a
      end
    end
    local H0 = ls.matrix(rows)
    local I = ls.I
    local V = ls.zeros(n, n, "complex")
    for i = 1, n do
      for j = i, n do
        local re, im = 0.2 * math.cos(0.9 * i + 1.3 * j), (i == j) and 0 or 0.15 * math.sin(i - 2 * j)
        V:set(i, j, re, im); V:set(j, i, re, -im)
      end
    end
    local part = ls.perturb(H0, V, { order = 6, levels = { 2 } })   -- bordered route
    local full = ls.perturb(H0, V, { order = 6 })                   -- full eigenbasis route
    for k = 0, 6 do
      assert.is_true(math.abs(part:energy(2, k) - full:energy(2, k)) < 1e-12 * math.max(1, math.abs(full:energy(2, k))), "k = " .. k)
    end
    assert.is_true(part:check(0.01).max_error < 1e-12)
    -- states agree up to the sign of the unperturbed eigenvector
    local a0, b0 = part:state(2, 0), full:state(2, 0)
    local sg = ((a0:get(1, 1)) * (b0:get(1, 1)) + (a0:get(2, 1)) * (b0:get(2, 1))) > 0 and 1 or -1
    for k = 0, 6 do
      local a, b = part:state(2, k), full:state(2, k)
      for i = 1, n do
        local ar, ai = a:get(i, 1)
        local br, bi = b:get(i, 1)
        assert.is_true(math.abs(ar - sg * br) < 1e-11 and math.abs(ai - sg * bi) < 1e-11, ("k=%d i=%d"):format(k, i))
      end
    end
  end)

  it("two-level system: square-root expansion", function()
    -- E = (1 - sqrt(1 + 4 g^2 lambda^2))/2 for H0 = diag(0, 1), V = g sigma_x-like coupling (from memory;
    -- METHODS.md sec. 2: -g^2/D + g^4/D^3 - 2 g^6/D^5)
    local g = 0.3
    local s = ls.perturb(ls.matrix { { 0, 0 }, { 0, 1 } }, ls.matrix { { 0, g }, { g, 0 } }, { order = 7 })
    assert.is_true(rel(s:energy(1, 2), -g ^ 2) < 1e-12)
    assert.is_true(rel(s:energy(1, 4), g ^ 4) < 1e-12)
    assert.is_true(rel(s:energy(1, 6), -2 * g ^ 6) < 1e-12)
    assert.is_true(math.abs(s:energy(1, 3)) < 1e-14)
    local c = s:check(0.1)
    assert.is_true(c.max_error < 1e-9)
  end)

  it("oscillator with linear force: E2 = -g^2/2, higher orders zero", function()
    -- exact completion of the square, E = n + 1/2 - g^2/2 (common practice)
    local B = ls.oscillator(30)
    local H0 = B:diag(function(l) return l.n + 0.5 end)
    local s = ls.perturb(H0, B.x, { order = 6, levels = { 1, 2 } })
    for lev = 1, 2 do
      assert.is_true(math.abs(s:energy(lev, 1)) < 1e-14)
      assert.is_true(rel(s:energy(lev, 2), -0.5) < 1e-12)
      for k = 3, 6 do assert.is_true(math.abs(s:energy(lev, k)) < 1e-12) end
    end
  end)

  it("degenerate pair split at second order, not at first", function()
    -- H0 = diag(0, 0, 1), V_PP = c*1, couplings a, b to the third state: second-order matrix
    -- -[a;b][a b] has eigenvalues -(a^2+b^2) and 0 (from memory, METHODS.md sec. 2)
    local a, b, c = 0.3, 0.4, 0.2
    local s = ls.perturb(ls.matrix { { 0, 0, 0 }, { 0, 0, 0 }, { 0, 0, 1 } },
      ls.matrix { { c, 0, a }, { 0, c, b }, { a, b, 0 } }, { order = 4 })
    assert.is_true(rel(s:energy(1, 1), c) < 1e-12 and rel(s:energy(2, 1), c) < 1e-12)
    assert.is_true(rel(s:energy(1, 2), -(a * a + b * b)) < 1e-12)
    assert.is_true(math.abs(s:energy(2, 2)) < 1e-12)
    local gr = s:groups()
    assert.are.equal(2, #gr)
    assert.are.same({ 1, 2 }, gr[1].members)
    assert.are.equal(2, gr[1].split_order)
    assert.is_true(s:check(0.01).max_error < 1e-8)
  end)

  it("hydrogen n=2 Stark: -3F, 0, 0, +3F", function()
    -- <2s|z|2p0> = -3 a.u. (Bethe & Salpeter, Quantum Mechanics of One- and Two-Electron Atoms, 1957)
    local E = -1 / 8
    local H0 = ls.matrix { { E, 0, 0, 0 }, { 0, E, 0, 0 }, { 0, 0, E, 0 }, { 0, 0, 0, E } }
    local V = ls.matrix { { 0, -3, 0, 0 }, { -3, 0, 0, 0 }, { 0, 0, 0, 0 }, { 0, 0, 0, 0 } }
    local s = ls.perturb(H0, V, { order = 3 })
    local want = { -3, 0, 0, 3 }
    for i = 1, 4 do
      assert.is_true(math.abs(s:energy(i, 0) - E) < 1e-14)
      assert.is_true(math.abs(s:energy(i, 1) - want[i]) < 1e-12)
    end
    assert.are.equal(1, s:info(1).split_order)
    -- with the basis the report names each level's unperturbed state (common practice)
    local B = ls.basis { "2s", "2p0", "2p+1", "2p-1" }
    local sb = ls.perturb(H0, V, { order = 3, basis = B })
    assert.are.equal("2p+1", sb:label(2))
    assert.are.equal("~2s", sb:label(1)) -- (2s + 2p0)/sqrt 2: the first largest component, marked
    local text = tostring(sb)
    assert.is_truthy(text:find("level state", 1, true))
    assert.is_truthy(text:find("\n     2 2p+1 ", 1, true), text)
    assert.are.equal("~2s", sb:totable().levels[4].label)
    assert.is_nil(s:label(1)) -- no basis given
    assert.error_matches(function() ls.perturb(H0, V, { basis = ls.basis(3) }) end,
      "bad argument #3 to 'perturb' ('basis' has 3 states but H0 is 4x4)", 1, true)
    assert.error_matches(function() ls.perturb(H0, V, { basis = "x" }) end,
      "bad argument #3 to 'perturb' ('basis' must be a basis)", 1, true)
  end)

  it("complex Hermitian input, non-diagonal H0", function()
    -- series versus exact diagonalization (common practice)
    local I = ls.I
    local H0 = ls.matrix { { 1, 0.2 }, { 0.2, 3 } }
    local V = ls.matrix { { 0.1, 0 }, { 0, -0.1 } } + ls.matrix { { 0, 0 }, { 1, 0 } } * (0.3 * I)
      + ls.matrix { { 0, 1 }, { 0, 0 } } * (-0.3 * I)
    local s = ls.perturb(H0, V, { order = 10 })
    local c = s:check(0.05)
    assert.is_true(c.max_error < 1e-12)
    local psi = s:state(1, 0)
    assert.are.equal(2, (psi:dim()))
  end)

  it("Pade and radius", function()
    -- two-level: radius 1/(2g) in lambda (METHODS.md sec. 3, Domb-Sykes check)
    local g = 0.5
    local s = ls.perturb(ls.matrix { { 0, 0 }, { 0, 1 } }, ls.matrix { { 0, g }, { g, 0 } }, { order = 20 })
    local lam = 0.4
    local exact = (1 - math.sqrt(1 + 4 * g * g * lam * lam)) / 2
    assert.is_true(math.abs(s:pade(1, lam, 10, 10) - exact) < 1e-10)
    local r = s:radius(1)
    assert.is_true(math.abs(r - 1.0) < 0.2)
    assert.is_string(tostring(s))
    assert.is_table(s:totable().levels)
  end)

  it("radius of a terminating series: no estimate from rounding noise", function()
    -- linear force g x on an oscillator: E = n + 1/2 - g^2/2 exactly, so
    -- E(1) = 0, E(2) = -1/2 (g = 1) and every higher order is 0 (completing
    -- the square, common practice); the computed E(4), E(6) are ~1e-17 noise
    local o = ls.oscillator(30)
    local s = ls.perturb(o.number + 0.5, o.x, { order = 8, levels = { 1, 2 } })
    assert.is_true(math.abs(s:energy(1, 2) + 0.5) < 1e-14)
    for level = 1, 2 do
      local r, note = s:radius(level)
      assert.is_nil(r)
      assert.truthy(note:find("coefficients vanish", 1, true), note)
    end
  end)

  it("raises clear errors", function()
    local H0 = ls.matrix { { 0, 0 }, { 0, 1 } }
    local V = ls.matrix { { 0, 1 }, { 1, 0 } }
    assert.has_error(function() ls.perturb(H0, ls.matrix { { 1 } }) end)
    local ok, err = pcall(ls.perturb, H0, ls.matrix { { 0, 1 }, { 2, 0 } })
    assert.is_false(ok); assert.is_truthy(err:find("perturb") and err:find("Hermitian"))
    ok, err = pcall(ls.perturb, H0, V, { order = 0 })
    assert.is_truthy(err:find("order"))
    ok, err = pcall(ls.perturb, H0, V, { order = 1001 })
    assert.is_truthy(err:find("order"))
    local s = ls.perturb(H0, V, { order = 2 })
    ok, err = pcall(s.energy, s, 3, 1)
    assert.is_truthy(err:find("level"))
    ok, err = pcall(ls.perturb, H0, V, { levels = { 5 } })
    assert.is_truthy(err:find("levels"))
  end)
  it("check names itself when H0 + lambda V cannot be diagonalized", function()
    -- found by the fuzz: an overflowing lambda (common practice: errors name the function)
    local s = ls.perturb(ls.matrix{ { 0, 0 }, { 0, 1 } }, ls.matrix{ { 0, 2 }, { 2, 0 } }, { order = 2 })
    assert.error_matches(function() s:check(1e308) end, "bad argument #1 to 'check'", 1, true)
  end)
end)
