-- Rigid rotor (ls.rotor) and angular-momentum coupling (ls.clebsch,
-- ls.wigner3j): tables, cos theta, second-order Stark shifts, bad input.
local ls = require "levelshift"

local sqrt = math.sqrt
local function near(a, b, tol) return math.abs(a - b) <= tol end

describe("ls.clebsch", function()
  it("matches tabulated values", function()
    -- source: Particle Data Group, Review of Particle Physics, table "Clebsch-Gordan
    -- coefficients, spherical harmonics and d functions" (1/2 x 1/2 and 1 x 1 blocks; from memory)
    local cases = {
      { 0.5, 0.5, 0.5, -0.5, 1, 0, sqrt(1 / 2) }, { 0.5, -0.5, 0.5, 0.5, 1, 0, sqrt(1 / 2) },
      { 0.5, 0.5, 0.5, -0.5, 0, 0, sqrt(1 / 2) }, { 0.5, -0.5, 0.5, 0.5, 0, 0, -sqrt(1 / 2) },
      { 1, 1, 1, -1, 2, 0, sqrt(1 / 6) }, { 1, 0, 1, 0, 2, 0, sqrt(2 / 3) }, { 1, 1, 1, -1, 1, 0, sqrt(1 / 2) },
      { 1, 0, 1, 0, 1, 0, 0 }, { 1, 1, 1, -1, 0, 0, sqrt(1 / 3) }, { 1, 0, 1, 0, 0, 0, -sqrt(1 / 3) },
      { 1, 1, 1, 0, 2, 1, sqrt(1 / 2) }, { 1, 0, 1, 1, 1, 1, -sqrt(1 / 2) },
      { 1, 1, 0.5, -0.5, 1.5, 0.5, sqrt(1 / 3) }, { 1, 0, 0.5, 0.5, 0.5, 0.5, -sqrt(1 / 3) },
      { 1, 1, 1, 1, 2, 2, 1 },
    }
    for i, c in ipairs(cases) do
      local v = ls.clebsch(c[1], c[2], c[3], c[4], c[5], c[6])
      assert.is_true(near(v, c[7], 1e-15), "case " .. i .. ": " .. v)
    end
    -- selection rules give zeros, not errors
    assert.are.equal(0, ls.clebsch(1, 1, 1, 0, 2, 0))   -- M != m1 + m2
    assert.are.equal(0, ls.clebsch(1, 0, 1, 0, 3, 0))   -- triangle rule
  end)

  it("matches the closed forms for j2 = 1/2 and j2 = 1", function()
    -- source: Condon & Shortley, The Theory of Atomic Spectra, CUP 1935, sec. 3^14,
    -- tables 1^3 (j2 = 1/2) and 2^3 (j2 = 1) (from memory)
    for j1 = 0.5, 6, 0.5 do
      for M = -(j1 - 0.5), j1 - 0.5 + 1e-9, 1 do
        -- J = j1 + 1/2, J = j1 - 1/2 with m2 = +-1/2
        local c1 = ls.clebsch(j1, M - 0.5, 0.5, 0.5, j1 + 0.5, M)
        local c2 = ls.clebsch(j1, M + 0.5, 0.5, -0.5, j1 + 0.5, M)
        assert.is_true(near(c1, sqrt((j1 + M + 0.5) / (2 * j1 + 1)), 1e-14))
        assert.is_true(near(c2, sqrt((j1 - M + 0.5) / (2 * j1 + 1)), 1e-14))
        if j1 >= 1 then
          local c3 = ls.clebsch(j1, M - 0.5, 0.5, 0.5, j1 - 0.5, M)
          local c4 = ls.clebsch(j1, M + 0.5, 0.5, -0.5, j1 - 0.5, M)
          assert.is_true(near(c3, -sqrt((j1 - M + 0.5) / (2 * j1 + 1)), 1e-14))
          assert.is_true(near(c4, sqrt((j1 + M + 0.5) / (2 * j1 + 1)), 1e-14))
        end
      end
    end
    for j1 = 1, 8 do
      for m = -j1, j1 do
        local up = ls.clebsch(j1, m, 1, 0, j1 + 1, m)
        local same = ls.clebsch(j1, m, 1, 0, j1, m)
        assert.is_true(near(up, sqrt((j1 - m + 1) * (j1 + m + 1) / ((2 * j1 + 1) * (j1 + 1))), 1e-14))
        assert.is_true(near(same, m / sqrt(j1 * (j1 + 1)), 1e-14))
        if math.abs(m) <= j1 - 1 then
          local down = ls.clebsch(j1, m, 1, 0, j1 - 1, m)
          assert.is_true(near(down, -sqrt((j1 - m) * (j1 + m) / (j1 * (2 * j1 + 1))), 1e-14))
        end
      end
    end
  end)

  it("is orthonormal and the 3j symbols carry their symmetry", function()
    -- sum_{m1} <j1 m1 j2 M-m1|J M><j1 m1 j2 M-m1|J' M> = delta_JJ' (common practice)
    local j1, j2, M = 7, 5.5, 1.5
    for J = 1.5, 12.5 do
      for J2 = 1.5, 12.5 do
        local acc = 0
        for m1 = -j1, j1 do
          local m2 = M - m1
          if math.abs(m2) <= j2 then acc = acc + ls.clebsch(j1, m1, j2, m2, J, M) * ls.clebsch(j1, m1, j2, m2, J2, M) end
        end
        assert.is_true(near(acc, J == J2 and 1 or 0, 1e-13), J .. " " .. J2 .. " " .. acc)
      end
    end
    -- (1 1 2; 1 -1 0) = 1/sqrt(30) (Edmonds, Angular Momentum in Quantum Mechanics, 1957, table 2, from memory)
    assert.is_true(near(ls.wigner3j(1, 1, 2, 1, -1, 0), 1 / sqrt(30), 1e-15))
    -- odd permutation multiplies by (-1)^(j1+j2+j3) (Edmonds 1957 eq. 3.7.5)
    local a = ls.wigner3j(3, 2.5, 1.5, -1, 0.5, 0.5)
    assert.is_true(near(ls.wigner3j(2.5, 3, 1.5, 0.5, -1, 0.5), -a, 1e-15))
    assert.is_true(a ~= 0)
  end)

  it("rejects bad arguments", function()
    assert.error_matches(function() ls.clebsch(-1, 0, 1, 0, 1, 0) end, "bad argument #1 to '.-clebsch' %(j1 must be non%-negative")
    assert.error_matches(function() ls.clebsch(0.3, 0, 1, 0, 1, 0) end, "j1 must be a multiple of 1/2")
    assert.error_matches(function() ls.clebsch(1, 2, 1, 0, 1, 0) end, "bad argument #2 to '.-clebsch' %(|m1| = 2.0 exceeds j1 = 1.0%)")
    assert.error_matches(function() ls.clebsch(1, 0.5, 1, 0, 1, 0) end, "j1 %+ m1 must be an integer")
    assert.error_matches(function() ls.clebsch(1, 0, 1, 0, 1, 0.5) end, "bad argument #6 to '.-clebsch'")
    assert.error_matches(function() ls.clebsch(1, 0, "a", 0, 1, 0) end, "bad argument #3 to '.-clebsch' %(number")
    assert.error_matches(function() ls.clebsch(1, 0, 1, 0, 5000, 0) end, "|J| <= 1000")
    assert.error_matches(function() ls.wigner3j(1, 1, 1, 0, 0, 2) end, "bad argument #6 to '.-wigner3j'")
  end)
end)

describe("ls.rotor", function()
  it("has |J M> states with labels J, M, M from +J down", function()
    local R = ls.rotor(3)
    assert.are.equal(16, R:dim())
    assert.are.equal("rotor", R:kind())
    local s = R:labels(3)
    assert.are.equal(1, s.J)
    assert.are.equal(0, s.M)
    assert.are.equal(R:find { J = 2, M = -2 }, 9)
    for i = 1, 16 do
      local l = R:labels(i)
      assert.are.equal(l.J * (l.J + 1), R.J2:get(i, i))
      assert.are.equal(l.M, R.Jz:get(i, i))
    end
    local F = ls.rotor(4, { M = -2 })
    assert.are.equal(3, F:dim())
    assert.are.equal(2, F:labels(1).J)
    assert.are.equal(-2, F:labels(3).M)
  end)

  it("cos theta: CG-built elements equal the closed form", function()
    -- <J+1 M|cos theta|J M> = sqrt(((J+1)^2 - M^2)/((2J+1)(2J+3))) (Condon & Shortley 1935, sec. 9^3,
    -- from memory; also Townes & Schawlow, Microwave Spectroscopy, 1955, ch. 10)
    local Jmax = 25
    local R = ls.rotor(Jmax)
    local C = R.cos
    assert.is_true(C:is_hermitian())
    for J = 0, Jmax - 1 do
      for M = -J, J do
        local i, j = R:find { J = J + 1, M = M }, R:find { J = J, M = M }
        local want = sqrt(((J + 1) ^ 2 - M * M) / ((2 * J + 1) * (2 * J + 3)))
        assert.is_true(near(C:get(i, j), want, 1e-14), J .. " " .. M)
        assert.is_true(near(C:get(j, i), want, 1e-14))
      end
    end
    -- no diagonal elements (parity, common practice)
    for i = 1, R:dim() do assert.are.equal(0, C:get(i, i)) end
    -- fixed-M basis carries the same numbers
    local F = ls.rotor(Jmax, { M = 3 })
    assert.is_true(near(F.cos:get(2, 1), sqrt((16 - 9) / (7 * 9)), 1e-15))
  end)

  it("cos2 is exact up to Jmax, where cos * cos is not", function()
    -- <J M|cos^2|J M> = ((J+1)^2 - M^2)/((2J+1)(2J+3)) + (J^2 - M^2)/((2J-1)(2J+1)) (sum of the
    -- squared closed-form cos elements above over J' = J +- 1, common practice); off the top
    -- edge cos2 equals the product of the truncated cos matrices
    for _, R in ipairs { ls.rotor(5), ls.rotor(7, { M = -2 }) } do
      local C2, CC = R.cos2, R.cos * R.cos
      local Jtop = R:labels(R:dim()).J
      for i = 1, R:dim() do
        local l = R:labels(i)
        local J, M = l.J, l.M
        local want = ((J + 1) ^ 2 - M * M) / ((2 * J + 1) * (2 * J + 3))
        if J > 0 then want = want + (J * J - M * M) / ((2 * J - 1) * (2 * J + 1)) end
        assert.is_true(near(C2:get(i, i), want, 1e-15), J .. " " .. M)
        for j = 1, R:dim() do
          if J < Jtop and R:labels(j).J < Jtop then assert.is_true(near(C2:get(i, j), CC:get(i, j), 1e-15)) end
        end
      end
    end
  end)

  it("ladder operators: [Jx, Jy] = i Jz and Jx^2 + Jy^2 + Jz^2 = J2", function()
    -- common practice (angular-momentum algebra; exact since each J block is complete)
    local R = ls.rotor(3)
    local c = R.Jx * R.Jy - R.Jy * R.Jx - ls.I * R.Jz
    local s = R.Jx * R.Jx + R.Jy * R.Jy + R.Jz * R.Jz - R.J2
    for i = 1, R:dim() do
      for j = 1, R:dim() do
        local re, im = c:get(i, j)
        assert.is_true(math.abs(re) < 1e-13 and math.abs(im) < 1e-13)
        local r2, i2 = s:get(i, j)
        assert.is_true(math.abs(r2) < 1e-13 and math.abs(i2 or 0) < 1e-13)
      end
    end
  end)

  -- Second-order Stark shift of a linear rotor, H0 = B J^2, V = -mu E cos theta:
  --   E2 = (mu E)^2/(2B) [J(J+1) - 3M^2]/[J(J+1)(2J-1)(2J+3)]  (J > 0),  -(mu E)^2/(6B)  (J = 0)
  -- source: Townes & Schawlow, Microwave Spectroscopy, McGraw-Hill 1955, ch. 10 (eq. 10-9).
  -- Checked independently: sum over J' = J +- 1 of |<J' M|cos|J M>|^2/(E_J - E_J') with the
  -- closed-form cos elements above gives (2J+1)[J(J+1) - 3M^2]/(J(J+1)(2J-1)(2J+1)(2J+3)).
  local function stark(B, muE, J, M)
    if J == 0 then return -muE * muE / (6 * B) end
    return muE * muE / (2 * B) * (J * (J + 1) - 3 * M * M) / (J * (J + 1) * (2 * J - 1) * (2 * J + 3))
  end

  it("Stark shifts for every J <= 3 and every M through the degenerate groups", function()
    local Bc, muE = 1.73, 0.61
    local R = ls.rotor(6)
    local H0, V = Bc * R.J2, -muE * R.cos
    local levels = {}
    for i = 1, 16 do levels[i] = i end
    local s = ls.perturb(H0, V, { order = 2, levels = levels })
    for J = 0, 3 do
      -- group J holds levels J^2+1 .. (J+1)^2, sorted by ascending correction
      local want = {}
      for M = -J, J do want[#want + 1] = stark(Bc, muE, J, M) end
      table.sort(want)
      for k = 1, 2 * J + 1 do
        local lev = J * J + k
        assert.is_true(near(s:energy(lev, 0), Bc * J * (J + 1), 1e-13))
        assert.is_true(near(s:energy(lev, 1), 0, 1e-14))
        assert.is_true(near(s:energy(lev, 2), want[k], 1e-13 * muE * muE / Bc), "J=" .. J .. " k=" .. k)
      end
    end
    local gr = s:groups()
    assert.is_true(#gr >= 4)
    assert.are.equal(3, #gr[2].members)
    assert.are.equal(7, #gr[4].members)
  end)

  it("Stark shifts in fixed-M bases, and against dense diagonalization", function()
    local Bc = 2.17
    for M = 0, 3 do
      local F = ls.rotor(8, { M = M })
      local s = ls.perturb(Bc * F.J2, -F.cos, { order = 2 })
      for lev = 1, 4 - M do
        local J = F:labels(lev).J
        assert.is_true(near(s:energy(lev, 2), stark(Bc, 1, J, M), 1e-13), "J=" .. J .. " M=" .. M)
      end
      -- exact: (E(muE) - E0)/muE^2 -> E2 + O(muE^2) (common practice)
      local muE = 0.01
      local E = ls.eigen(Bc * F.J2 - muE * F.cos)
      for lev = 1, 4 - M do
        local J = F:labels(lev).J
        local got = (E[lev] - Bc * J * (J + 1)) / muE ^ 2
        assert.is_true(near(got, stark(Bc, 1, J, M), 1e-3), "exact J=" .. J .. " M=" .. M .. ": " .. got)
      end
    end
  end)

  it("recipe rotor_stark", function()
    -- the recipe's shifts against the formula above (Townes & Schawlow 1955)
    local m = ls.recipe("rotor_stark", { B = 0.87, mu = 1.9, E = 0.13, Jmax = 8, M = -2 })
    local s = ls.perturb(m.H0, m.V, { order = 2 })
    for lev = 1, 3 do
      local J = m.basis:labels(lev).J
      assert.is_true(near(s:energy(lev, 2), stark(0.87, 1.9 * 0.13, J, -2), 1e-14))
      assert.is_true(near(m.e2(J, -2), stark(0.87, 1.9 * 0.13, J, -2), 1e-16))
    end
    assert.are.equal(81, ls.recipe("rotor_stark", { Jmax = 8 }).basis:dim())
    assert.error_matches(function() ls.recipe("rotor_stark", { Jmax = 3, M = 4 }) end, "parameter 'M' = 4 needs |M| <= Jmax = 3")
    assert.error_matches(function() ls.recipe("rotor_stark", { M = "x" }) end, "parameter 'M' must be \"all\" or an integer")
    assert.error_matches(function() ls.recipe("rotor_stark", { B = -1 }) end, "parameter 'B' must be positive")
  end)

  it("recipe rotor_stark in laboratory units (B in GHz, mu in debye, E in kV/cm)", function()
    -- invented molecule: B = 10 GHz, mu = 1 D, E = 1 kV/cm.
    -- Hand conversion (done outside the module, 30-digit decimal arithmetic) from
    -- CODATA 2018 exact values (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)):
    -- 1 D = 1e-21/c C m (definition of the debye), so
    -- mu E / h = 1e-21/c * 1e5 V/m / h = 1e-16/(c h) Hz = 0.50341165675427 GHz
    -- (0.5034 GHz from memory) = 0.0167920053797 cm^-1.
    local muE_GHz, muE_cm = 0.50341165675427, 0.0167920053797441
    local p = { B = 10, B_unit = "GHz", mu = 1, mu_unit = "D", E = 1, E_unit = "kV/cm", Jmax = 8 }
    local m = ls.recipe("rotor_stark", p)
    assert.are.equal("GHz", m.units)
    assert.are.equal("GHz", m.params.energy_unit)
    assert.is_true(near(m.muE, muE_GHz, 1e-14 * muE_GHz), "muE = " .. m.muE)
    assert.is_true(near(m.B, 10, 0))
    -- series shifts against the dimensionless Townes & Schawlow (1955) formula,
    -- every level with J <= 3 and every M; groups sorted by ascending correction
    local levels = {}
    for i = 1, 16 do levels[i] = i end
    local s = ls.perturb(m.H0, m.V, { order = 2, levels = levels })
    for J = 0, 3 do
      local want = {}
      for M = -J, J do want[#want + 1] = stark(10, muE_GHz, J, M) end
      table.sort(want)
      for k = 1, 2 * J + 1 do
        assert.is_true(near(s:energy(J * J + k, 2), want[k], 1e-12 * muE_GHz ^ 2 / 10), "J=" .. J .. " k=" .. k)
      end
    end
    -- same molecule with B in MHz and cm^-1, energies in cm^-1 and MHz
    local q = { B = 10000, B_unit = "MHz", mu = 1, mu_unit = "debye", E = 1e5, E_unit = "V/m", Jmax = 8,
      energy_unit = "cm^-1", M = 1 }
    local mc = ls.recipe("rotor_stark", q)
    assert.are.equal("cm^-1", mc.units)
    assert.is_true(near(mc.muE, muE_cm, 1e-13 * muE_cm))
    local Bcm = 10 / 29.9792458 -- c in cm/ns, exact
    assert.is_true(near(mc.B, Bcm, 1e-14 * Bcm))
    local sc = ls.perturb(mc.H0, mc.V, { order = 2 })
    for lev = 1, 3 do
      local J = mc.basis:labels(lev).J
      assert.is_true(near(sc:energy(lev, 2), stark(Bcm, muE_cm, J, 1), 1e-12 * muE_cm ^ 2 / Bcm), "cm J=" .. J)
    end
    -- field in atomic units, dipole in e a0, B in cm^-1: 1 au_field = 5.14220674763e11 V/m and
    -- 1 D = 0.3934302695 e a0 (CODATA 2018 e a0 = 8.4783536255e-30 C m; hand conversion)
    local ma = ls.recipe("rotor_stark", { B = Bcm, B_unit = "cm^-1", mu = 0.3934302695, mu_unit = "ea0",
      E = 1e5 / 5.14220674763e11, E_unit = "au_field", energy_unit = "GHz" })
    assert.is_true(near(ma.muE, muE_GHz, 1e-9 * muE_GHz))
    assert.is_true(near(ma.B, 10, 1e-13))
    -- the old arbitrary-unit form is the default and unchanged
    local old = ls.recipe("rotor_stark", { B = 2, mu = 3, E = 0.5 })
    assert.is_nil(old.units)
    assert.are.equal(1.5, old.muE)
    -- mixing, unknown names, energy_unit without laboratory units
    assert.error_matches(function() ls.recipe("rotor_stark", { B_unit = "GHz", mu_unit = "D" }) end,
      "parameters 'B_unit', 'mu_unit', 'E_unit' must be all \"arb\" or all laboratory units", 1, true)
    assert.error_matches(function() ls.recipe("rotor_stark", { B_unit = "GHz", mu_unit = "Debye", E_unit = "V/m" }) end,
      "parameter 'mu_unit' must be one of arb, D, debye, ea0, au_dipole, C*m (got Debye)", 1, true)
    assert.error_matches(function() ls.recipe("rotor_stark", { B_unit = "GHz", mu_unit = "D", E_unit = "kV/mm" }) end,
      "parameter 'E_unit' must be one of arb, V/m, V/cm, kV/cm, au_field (got kV/mm)", 1, true)
    assert.error_matches(function() ls.recipe("rotor_stark", { B_unit = "Ghz", mu_unit = "D", E_unit = "V/m" }) end,
      "parameter 'B_unit' must be one of arb, GHz, MHz", 1, true)
    assert.error_matches(function() ls.recipe("rotor_stark", { energy_unit = "GHz" }) end,
      "parameter 'energy_unit' = GHz needs laboratory units for B, mu and E", 1, true)
    -- the program's report runs and names the units
    local bin = os.getenv("LVS_BIN") or "build/levelshift"
    local f = io.popen(bin .. " rotor_stark B=10 B_unit=GHz mu=1 mu_unit=D E=1 E_unit=kV/cm Jmax=6 2>&1; echo \"rc=$?\"")
    local out = f:read("a")
    f:close()
    assert.truthy(out:find("energies in GHz", 1, true), out)
    assert.truthy(out:find("mu_unit          = D", 1, true), out)
    assert.truthy(out:find("rc=0", 1, true), out)
    -- first level: E0 = 0, E2 = -(mu E)^2/(6B) in GHz, printed with 7 digits
    assert.truthy(out:find(string.format("%.7g", -muE_GHz ^ 2 / 60), 1, true), out)
  end)

  it("rejects bad input with clear messages", function()
    assert.error_matches(function() ls.rotor(-1) end, "bad argument #1 to '.-rotor' %(Jmax must be at least 0%)")
    assert.error_matches(function() ls.rotor(1.5) end, "Jmax must be an integer")
    assert.error_matches(function() ls.rotor("a") end, "integer Jmax >= 0 expected")
    assert.error_matches(function() ls.rotor(2, { M = 3 }) end, "bad argument #2 to '.-rotor' %(|M| = 3 exceeds Jmax = 2%)")
    assert.error_matches(function() ls.rotor(2, { m = -3 }) end, "|M| = 3 exceeds Jmax = 2")
    assert.error_matches(function() ls.rotor(2, { M = 0.5 }) end, "option 'M' must be an integer")
    assert.error_matches(function() ls.rotor(2, { M = 1, m = 1 }) end, "give M or m, not both")
    assert.error_matches(function() ls.rotor(2, { K = 1 }) end, "unknown option 'K'")
    assert.error_matches(function() return ls.rotor(2, { M = 0 }).Jx end,
      "rotor with fixed M has no operator 'Jx' %(it has J2, Jz, cos, cos2, identity%)")
    assert.error_matches(function() return ls.rotor(2).sin end, "rotor has no operator 'sin'")
  end)
end)
