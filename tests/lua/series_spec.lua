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
end)
