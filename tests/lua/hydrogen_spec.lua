-- The hydrogen recipe (recipes/hydrogen.lua) and ls.coulomb_basis: Stark
-- shifts of hydrogen through ls.perturb, with the continuum carried by
-- Coulomb-Sturmian pseudostates.
local ls = require "levelshift"

local function rel(a, b) return math.abs(a - b) / math.abs(b) end

-- source: Bethe & Salpeter, Quantum Mechanics of One- and Two-Electron Atoms
-- (1957), sec. 52, in parabolic quantum numbers n1, n2, m (n = n1 + n2 + |m| + 1):
--   E1 = (3/2) n (n1 - n2) F
--   E2 = -(F^2/16) n^4 [17 n^2 - 3 (n1 - n2)^2 - 9 m^2 + 19]
-- (checked by hand: n = 1 gives -9/4, the 1s polarizability 9/2).
local function E1(n, n1, n2) return 1.5 * n * (n1 - n2) end
local function E2(n, n1, n2, m) return -(n ^ 4 / 16) * (17 * n * n - 3 * (n1 - n2) ^ 2 - 9 * m * m + 19) end
-- from memory: third and fourth orders in the same numbers (Alliluev &
-- Malkin, Sov. Phys. JETP 39, 627 (1974); for n = 1 the fourth order is the
-- -3555/64 of Bethe & Salpeter 1957, sec. 52)
local function E3(n, n1, n2, m) return (3 / 32) * n ^ 7 * (n1 - n2) * (23 * n * n - (n1 - n2) ^ 2 + 11 * m * m + 39) end
local function E4(n, n1, n2, m)
  local q, m2 = n1 - n2, m * m
  return -(n ^ 10 / 1024) * (5487 * n ^ 4 + 35182 * n * n - 1134 * m2 * q * q + 1806 * n * n * q * q
    - 3402 * n * n * m2 + 147 * q ^ 4 - 549 * m2 * m2 + 5754 * q * q - 8622 * m2 + 16211)
end

describe("hydrogen recipe", function()
  it("builds with the defaults: labels, exact n = 2 levels, documented parameters", function()
    local h = ls.recipe("hydrogen")
    assert.equal("hydrogen", h.name)
    assert.equal("all", h.params.m)
    assert.equal(3, h.params.lmax)
    assert.equal(16 * 16, h.basis:dim()) -- (lmax + 1)^2 blocks of nmax functions
    assert.equal("custom", h.basis:kind())
    local s = h.basis:labels(1)
    assert.same({ 1, 0, 0 }, { s.n, s.l, s.m })
    -- source: Bohr levels -1/(2 n^2) (Bethe & Salpeter 1957, eq. 2.12): n = 2
    -- lies in the space at kappa = 1/2, 1s converges geometrically in nmax
    for i = 2, 5 do
      local st = h.basis:labels(i)
      assert.equal(2, st.n)
      assert.near(-0.125, (h.H0:get(i, i)), 1e-14)
    end
    assert.near(-0.5, (h.H0:get(1, 1)), 1e-9)
    assert.near(h.bohr(2), (h.H0:get(2, 2)), 1e-14)
    -- V = F z
    assert.near(h.params.field * h.z:get(1, 3), (h.V:get(1, 3)), 1e-18)
    assert.equal("n=2 l=1 m=-1", h.basis:describe(3))
  end)

  it("gives the 1s polarizability 9/2 through ls.perturb", function()
    local h = ls.recipe("hydrogen")
    local F = h.params.field
    local s = ls.perturb(h.H0, h.V, { order = 2, levels = { 1 } })
    assert.near(0, s:energy(1, 1), 1e-15)
    -- source: alpha = 9/2 a.u., E2 = -alpha F^2/2 = -9/4 F^2 (Dalgarno &
    -- Lewis, Proc. R. Soc. A 233, 70 (1955); Bethe & Salpeter 1957, sec. 52)
    local alpha = -2 * s:energy(1, 2) / F ^ 2
    assert.is_true(rel(alpha, 4.5) < 1e-6, "alpha = " .. alpha)
  end)

  it("needs the continuum: only bound-like pseudostates miss part of alpha", function()
    -- sum over states by hand: the positive-energy pseudostates carry the
    -- continuum share; without them alpha falls well short of 9/2
    -- (source for the 9/2: Dalgarno & Lewis 1955; the continuum share of
    -- about 19% is from memory)
    local h = ls.recipe("hydrogen", { m = 0 })
    local all, bound = 0, 0
    local e1 = h.H0:get(1, 1)
    for k = 2, h.basis:dim() do
      local zk, ek = h.z:get(1, k), h.H0:get(k, k)
      local term = 2 * zk * zk / (ek - e1)
      all = all + term
      if ek < 0 then bound = bound + term end
    end
    assert.is_true(rel(all, 4.5) < 1e-6, "alpha " .. all)
    assert.is_true(bound < 4.0 and bound > 3.0, "bound-only alpha " .. bound)
  end)

  it("splits n = 2 at first order into -3F, 0, 0, +3F (degenerate group)", function()
    local h = ls.recipe("hydrogen")
    local F = h.params.field
    local s = ls.perturb(h.H0, h.V, { order = 2, levels = { 2, 3, 4, 5 } })
    local g = s:groups()
    assert.equal(1, #g)
    assert.same({ 2, 3, 4, 5 }, g[1].members)
    -- source: linear Stark effect E1 = (3/2) n (n1 - n2) F (Bethe & Salpeter
    -- 1957, sec. 52): n = 2 gives -3F, 0, 0, +3F
    local want = { E1(2, 0, 1), E1(2, 0, 0), E1(2, 0, 0), E1(2, 1, 0) }
    assert.same({ -3, 0, 0, 3 }, want)
    for i, lev in ipairs { 2, 3, 4, 5 } do
      assert.near(want[i], s:energy(lev, 1) / F, 1e-9)
    end
    -- the two unshifted states are the m = +-1 states
    for _, lev in ipairs { 3, 4 } do
      local psi = s:state(lev, 0)
      local w = 0
      for k = 1, h.basis:dim() do
        if math.abs(h.basis:labels(k).m) == 1 then w = w + (psi:get(k, 1)) ^ 2 end
      end
      assert.near(1, w, 1e-9)
    end
  end)

  it("gives the n = 2 second-order coefficients of the parabolic formula", function()
    local h = ls.recipe("hydrogen")
    local F = h.params.field
    local s = ls.perturb(h.H0, h.V, { order = 2, levels = { 2, 3, 4, 5 } })
    -- source: Bethe & Salpeter 1957, sec. 52 (formula above): m = 0 states
    -- (n1 - n2 = -+1) -84 F^2, |m| = 1 states (n1 = n2 = 0) -78 F^2
    assert.equal(-84, E2(2, 0, 1, 0))
    assert.equal(-84, E2(2, 1, 0, 0))
    assert.equal(-78, E2(2, 0, 0, 1))
    local want = { E2(2, 0, 1, 0), E2(2, 0, 0, 1), E2(2, 0, 0, -1), E2(2, 1, 0, 0) }
    for i, lev in ipairs { 2, 3, 4, 5 } do
      local c = s:energy(lev, 2) / F ^ 2
      assert.is_true(rel(c, want[i]) < 1e-6, "level " .. lev .. ": " .. c .. " vs " .. want[i])
    end
  end)

  it("reaches third and fourth order for 1s and n = 2", function()
    local h = ls.recipe("hydrogen", { field = 1 })
    local s = ls.perturb(h.H0, h.V, { order = 4, levels = { 1, 2, 3, 4, 5 } })
    -- from memory: Alliluev & Malkin 1974 (formulas above); 1s: E3 = 0,
    -- E4 = -3555/64 (Bethe & Salpeter 1957, sec. 52)
    assert.equal(-3555 / 64, E4(1, 0, 0, 0))
    assert.near(0, s:energy(1, 3), 1e-9)
    assert.is_true(rel(s:energy(1, 4), -3555 / 64) < 1e-6, "E4(1s) " .. s:energy(1, 4))
    local pn = { { 0, 1, 0 }, { 0, 0, 1 }, { 0, 0, -1 }, { 1, 0, 0 } }
    for i, lev in ipairs { 2, 3, 4, 5 } do
      local n1, n2, m = pn[i][1], pn[i][2], pn[i][3]
      local e3, e4 = E3(2, n1, n2, m), E4(2, n1, n2, m)
      if e3 == 0 then assert.near(0, s:energy(lev, 3), 1e-6)
      else assert.is_true(rel(s:energy(lev, 3), e3) < 1e-6, "E3 level " .. lev) end
      assert.is_true(rel(s:energy(lev, 4), e4) < 1e-6, "E4 level " .. lev .. ": " .. s:energy(lev, 4) .. " vs " .. e4)
    end
    assert.equal(1560, E3(2, 1, 0, 0))
    assert.equal(-257856, E4(2, 1, 0, 0))
    assert.equal(-221952, E4(2, 0, 0, 1))
  end)

  it("reaches sixth order for 1s with the default basis", function()
    local h = ls.recipe("hydrogen", { field = 1, m = 0 })
    local s = ls.perturb(h.H0, h.V, { order = 6, levels = { 1 } })
    -- from memory: E6(1s) = -2512779/512 F^6 (Silverstone, Phys. Rev. A 18,
    -- 1853 (1978)); needs l <= 3, converges geometrically in nmax
    assert.near(0, s:energy(1, 5), 1e-6)
    assert.is_true(rel(s:energy(1, 6), -2512779 / 512) < 1e-5, "E6(1s) " .. s:energy(1, 6))
  end)

  it("agrees with exact diagonalization of H0 + F z at small F", function()
    -- source: common practice (the series is the Taylor expansion of the
    -- exact eigenvalue); m = 0: 1s, then the n = 2 pair -+3F
    local h = ls.recipe("hydrogen", { m = 0, field = 2e-4 })
    local s = ls.perturb(h.H0, h.V, { order = 4, levels = { 1, 2, 3 } })
    local E = ls.eigen(h.H0 + h.V, { count = 3, vectors = false })
    assert.near(E[1], s:at(1, 1), 1e-14)
    assert.near(E[2], s:at(2, 1), 1e-11)
    assert.near(E[3], s:at(3, 1), 1e-11)
    -- and the second-order sum alone misses by about the third-order term
    local F = h.params.field
    local two = h.H0:get(2, 2) + s:energy(2, 1) + s:energy(2, 2)
    assert.is_true(math.abs(E[2] - two) > 0.5 * 1560 * F ^ 3)
  end)

  it("holds shell n exactly at kappa = 1/n", function()
    -- source: Bohr levels -1/(2 n^2) (Bethe & Salpeter 1957, eq. 2.12);
    -- Sturmians with kappa = Z/n contain shell n (Rotenberg 1962)
    local h = ls.recipe("hydrogen", { kappa = 1 / 3, lmax = 2, m = 0, nmax = 12 })
    local found = 0
    for i = 1, h.basis:dim() do
      if h.basis:labels(i).n == 3 then
        assert.near(-1 / 18, (h.H0:get(i, i)), 1e-14)
        found = found + 1
      end
    end
    assert.equal(3, found)
  end)

  it("prints a report from the program", function()
    local bin = os.getenv("LVS_BIN") or "build/levelshift"
    local f = io.popen(bin .. " hydrogen field=1e-3 m=0 2>&1; echo \"rc=$?\"")
    local out = f:read("a")
    f:close()
    assert.truthy(out:find("rc=0", 1, true), out)
    assert.truthy(out:find("recipe hydrogen", 1, true), out)
    -- E2 of the n = 2, m = 0 pair: -84 F^2 (Bethe & Salpeter 1957, sec. 52)
    assert.truthy(out:find("-8.4e-05", 1, true), out)
    f = io.popen(bin .. " hydrogen lmax=-2 2>&1; echo \"rc=$?\"")
    out = f:read("a")
    f:close()
    assert.truthy(out:find("parameter 'lmax' must be at least 0", 1, true), out)
    assert.falsy(out:find("rc=0", 1, true), out)
  end)

  it("rejects bad parameters with clear messages", function()
    assert.error_matches(function() ls.recipe("hydrogen", { lmax = -1 }) end,
      "recipe 'hydrogen': parameter 'lmax' must be at least 0", 1, true)
    assert.error_matches(function() ls.recipe("hydrogen", { nmax = 1 }) end,
      "recipe 'hydrogen': parameter 'nmax' must be at least 2", 1, true)
    assert.error_matches(function() ls.recipe("hydrogen", { kappa = 0 }) end,
      "recipe 'hydrogen': parameter 'kappa' must be positive", 1, true)
    assert.error_matches(function() ls.recipe("hydrogen", { kappa = -0.5 }) end,
      "parameter 'kappa' must be positive", 1, true)
    assert.error_matches(function() ls.recipe("hydrogen", { m = 2, lmax = 1 }) end,
      "recipe 'hydrogen': parameter 'm' = 2 exceeds lmax = 1", 1, true)
    assert.error_matches(function() ls.recipe("hydrogen", { m = "some" }) end,
      "parameter 'm' must be an integer or \"all\"", 1, true)
    assert.error_matches(function() ls.recipe("hydrogen", { fiedl = 0.1 }) end,
      "recipe 'hydrogen': unknown parameter 'fiedl' (accepted: field, field_unit, lmax, nmax, kappa, m)", 1, true)
  end)
end)

describe("ls.coulomb_basis", function()
  it("hands out H0, z, r, r2, L2, Lz with exact radial integrals", function()
    local B = ls.coulomb_basis { lmax = 1, nmax = 10, m = 0 }
    assert.equal(20, B:dim())
    assert.same({ "n", "l", "m" }, B:label_names())
    local i2s, i2p = B:find { n = 2, l = 0, m = 0 }, B:find { n = 2, l = 1, m = 0 }
    -- source: <r> = (3n^2 - l(l+1))/2, <r^2> = n^2 (5n^2 + 1 - 3l(l+1))/2
    -- (Bethe & Salpeter 1957, eq. 3.24)
    assert.near(6, (B.r:get(i2s, i2s)), 1e-12)
    assert.near(5, (B.r:get(i2p, i2p)), 1e-12)
    assert.near(42, (B.r2:get(i2s, i2s)), 1e-11)
    assert.near(2, (B.L2:get(i2p, i2p)), 0)
    assert.near(0, (B.Lz:get(i2p, i2p)), 0)
    -- source: <2s|r|2p> = -3 sqrt 3 (Bethe & Salpeter 1957, table 13) times
    -- <1 0|cos theta|0 0> = 1/sqrt 3, radial functions positive near r = 0
    assert.near(-3, (B.z:get(i2s, i2p)), 1e-12)
    assert.error_matches(function() return B.q end, "no operator 'q'", 1, true)
  end)

  it("hands out x and y with every m: the Stark pattern along x and y", function()
    local B = ls.coulomb_basis {}
    assert.is_true(B.y:is_complex())
    for _, dir in ipairs { "x", "y" } do
      local s = ls.perturb(B.H0, B[dir], { order = 2, levels = { 1, 2, 3, 4, 5 } })
      -- source: the field direction does not matter (common practice);
      -- alpha = 9/2 (Dalgarno & Lewis 1955), n = 2: -3, 0, 0, +3 at first
      -- order and -84, -78, -78, -84 at second (Bethe & Salpeter 1957, sec. 52)
      assert.is_true(rel(s:energy(1, 2), -2.25) < 1e-6, dir .. " " .. s:energy(1, 2))
      local e1, e2 = { -3, 0, 0, 3 }, { -84, -78, -78, -84 }
      for i = 1, 4 do
        assert.near(e1[i], s:energy(i + 1, 1), 1e-9)
        assert.is_true(rel(s:energy(i + 1, 2), e2[i]) < 1e-6, dir .. " level " .. (i + 1))
      end
    end
    assert.error_matches(function() return ls.coulomb_basis { m = 0 }.x end, "no operator 'x'", 1, true)
  end)

  it("keeps every m by default and takes a nuclear charge", function()
    local B = ls.coulomb_basis { lmax = 2, nmax = 4 }
    assert.equal(9 * 4, B:dim())
    -- source: hydrogen-like levels -Z^2/(2 n^2) (Bethe & Salpeter 1957,
    -- eq. 2.12): Z = 2 with kappa = 1 holds n = 2 exactly (-1/2)
    local He = ls.coulomb_basis { lmax = 1, nmax = 6, kappa = 1, Z = 2, m = 0 }
    assert.near(-0.5, (He.H0:get(He:find { n = 2, l = 1, m = 0 }, He:find { n = 2, l = 1, m = 0 })), 1e-13)
  end)

  it("rejects bad options naming the argument", function()
    assert.error_matches(function() ls.coulomb_basis { lmax = -1 } end,
      "bad argument #1 to 'coulomb_basis' (lmax must be 0 or more)", 1, true)
    assert.error_matches(function() ls.coulomb_basis { nmax = 0 } end,
      "nmax (radial functions per l) must be 1 or more", 1, true)
    assert.error_matches(function() ls.coulomb_basis { kappa = 0 } end,
      "kappa must be a positive finite number", 1, true)
    assert.error_matches(function() ls.coulomb_basis { kappa = 0 / 0 } end,
      "kappa must be a positive finite number", 1, true)
    assert.error_matches(function() ls.coulomb_basis { lmax = 1, m = -2 } end,
      "|m| = 2 exceeds lmax = 1", 1, true)
    assert.error_matches(function() ls.coulomb_basis { m = "most" } end,
      "m must be an integer or \"all\"", 1, true)
    assert.error_matches(function() ls.coulomb_basis { size = 3 } end,
      "unknown option 'size'", 1, true)
    assert.error_matches(function() ls.coulomb_basis(5) end, "table expected", 1, true)
  end)

  it("survives close and garbage collection", function()
    local B = ls.coulomb_basis { lmax = 1, nmax = 3, m = 0 }
    local z = B.z
    B:close()
    assert.error_matches(function() return B:dim() end, "closed basis", 1, true)
    collectgarbage()
    assert.equal(6, (z:dim()))
  end)
  it("takes the field in laboratory units", function()
    -- 1 a.u. of field = E_h/(e a0) = 5.14220674763e11 V/m (CODATA 2018,
    -- Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)); 1000 kV/cm = 1e8 V/m
    local lab = ls.recipe("hydrogen", { field = 1000, field_unit = "kV/cm" })
    local F = 1e8 / 5.14220674763e11
    assert.is_true(math.abs(lab.field / F - 1) < 1e-10)
    local au = ls.recipe("hydrogen", { field = F })
    local s1 = ls.perturb(lab.H0, lab.V, { order = 2, levels = { 1 } })
    local s2 = ls.perturb(au.H0, au.V, { order = 2, levels = { 1 } })
    assert.is_true(math.abs(s1:energy(1, 2) / s2:energy(1, 2) - 1) < 1e-9)
    -- and the ground-state shift is -(9/4) F^2 (Dalgarno & Lewis 1955)
    assert.is_true(math.abs(s1:energy(1, 2) / (-9 / 4 * F * F) - 1) < 1e-6)
    assert.has_error(function() ls.recipe("hydrogen", { field_unit = "V/furlong" }) end)
  end)
end)
