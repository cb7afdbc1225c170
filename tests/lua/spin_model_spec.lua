-- ls.spin_model: spin Hamiltonians from interaction terms with full tensors
-- (principal values and z-y-z Euler angles, or matrices), against closed
-- forms of magnetic resonance.
local ls = require "levelshift"

local function near(want, got, tol, what)
  assert(math.abs(got - want) <= tol,
    string.format("%s: expected %.15g, got %.15g (|diff| %.3g > %.3g)", what or "value", want, got,
      math.abs(got - want), tol))
end

local function levels(H)
  return ls.eigen(H, { vectors = false })
end

describe("spin_model", function()
  it("splits an S = 1/2 with an axial g tensor by mu B sqrt(g_par^2 cos^2 + g_perp^2 sin^2)", function()
    -- the effective g of an axial tensor at angle theta to its axis (Abragam & Bleaney,
    -- Electron Paramagnetic Resonance of Transition Ions, 1970; common practice);
    -- the axis tilted by Euler angles instead of the field gives the same splitting
    local gpar, gper = 2.3, 2.05
    for _, th in ipairs { 0, 30, 72 } do
      local t = math.rad(th)
      local want = math.sqrt(gpar ^ 2 * math.cos(t) ^ 2 + gper ^ 2 * math.sin(t) ^ 2)
      local m = ls.spin_model()
      local e = m:add_spin(0.5, "e")
      m:zeeman(e, { principal = { gper, gper, gpar } }, { math.sin(t), 0, math.cos(t) })
      local E = levels(m:hamiltonian())
      near(want, E[2] - E[1], 1e-13, "field at " .. th)
      local r = ls.spin_model()
      local e2 = r:add_spin(0.5)
      r:zeeman(e2, { principal = { gper, gper, gpar }, euler = { 0, th, 0 } }, { 0, 0, 1 })
      local F = levels(r:hamiltonian())
      near(want, F[2] - F[1], 1e-13, "axis at " .. th)
    end
  end)

  it("gives the zero-field levels -2D/3, D/3 - E, D/3 + E of S = 1 in any orientation", function()
    -- D (Sz^2 - 2/3) + E (Sx^2 - Sy^2) (common practice); rotation leaves the levels alone
    for _, eu in ipairs { { 0, 0, 0 }, { 20, 50, 70 }, { 123, 77, -40 } } do
      local m = ls.spin_model()
      local s = m:add_spin(1)
      m:zero_field(s, { axial = 3, rhombic = 0.4, euler = eu })
      local E = levels(m:hamiltonian())
      near(-2, E[1], 1e-13); near(0.6, E[2], 1e-13); near(1.4, E[3], 1e-13)
    end
  end)

  it("gives the quadrupole levels e^2qQ (3m^2 - I(I+1)) / (4I(2I-1)) of an axial coupling", function()
    -- (Abragam, The Principles of Nuclear Magnetism, 1961, chapter VI): I = 1: -e^2qQ/2, e^2qQ/4 twice;
    -- I = 3/2: -+e^2qQ/4 (two Kramers doublets)
    local m = ls.spin_model()
    local n = m:add_spin(1)
    m:quadrupole(n, { coupling = 2, euler = { 10, 40, 0 } })
    local E = levels(m:hamiltonian())
    near(-1, E[1], 1e-13); near(0.5, E[2], 1e-13); near(0.5, E[3], 1e-13)
    local q = ls.spin_model()
    local k = q:add_spin(1.5)
    q:quadrupole(k, { coupling = 2 })
    local F = levels(q:hamiltonian())
    near(-0.5, F[1], 1e-13); near(-0.5, F[2], 1e-13); near(0.5, F[3], 1e-13); near(0.5, F[4], 1e-13)
  end)

  it("gives exchange and point-dipole pairs their closed forms", function()
    -- J S1.S2: singlet -3J/4, triplet J/4 (common practice); d [S1.S2 - 3(S1.n)(S2.n)]: -d/2 twice,
    -- 0, d, whatever n (the secular and non-secular parts together; common practice)
    local m = ls.spin_model()
    local a, b = m:add_spin(0.5), m:add_spin(0.5)
    m:exchange(a, b, 0.8)
    local E = levels(m:hamiltonian())
    near(-0.6, E[1], 1e-14); near(0.2, E[4], 1e-14)
    local d = ls.spin_model()
    local c, e = d:add_spin(0.5), d:add_spin(0.5)
    d:dipolar(c, e, { strength = 0.7, direction = { 1, -2, 0.5 } })
    local F = levels(d:hamiltonian())
    near(-0.35, F[1], 1e-14); near(-0.35, F[2], 1e-14); near(0, F[3], 1e-14); near(0.7, F[4], 1e-14)
  end)

  it("splits H0 and V by group: the high-field hyperfine lines m_S m_I |A . z| at first order", function()
    -- H0 = the electron Zeeman term along z, V = S . A . I with a rotated axial A: to first order
    -- the lines are m_S m_I sqrt(A_zx^2 + A_zy^2 + A_zz^2) (Abragam & Bleaney 1970, the high-field
    -- hyperfine of a tilted tensor)
    local m = ls.spin_model()
    local e, n = m:add_spin(0.5, "e"), m:add_spin(0.5, "H")
    m:zeeman(e, 2.0, { 0, 0, 500 })
    local Apar, Aper, beta = 40, 15, math.rad(35)
    m:hyperfine(e, n, { principal = { Aper, Aper, Apar }, euler = { 0, 35, 0 } })
    local H0, V = m:split({ "zeeman" }, { "hyperfine" })
    -- the z row of R diag(A) R^T for R = Ry(beta): (A_par - A_perp) sin cos, 0, A_perp sin^2 + A_par cos^2
    local azx = (Apar - Aper) * math.sin(beta) * math.cos(beta)
    local azz = Aper * math.sin(beta) ^ 2 + Apar * math.cos(beta) ^ 2
    local Aeff = math.sqrt(azx ^ 2 + azz ^ 2)
    local s = ls.perturb(H0, V, { order = 1, levels = { 1, 2, 3, 4 } })
    local first = {}
    for k = 1, 4 do first[k] = s:energy(k, 1) end
    table.sort(first)
    near(-Aeff / 4, first[1], 1e-12); near(Aeff / 4, first[4], 1e-12)
    local ok, err = pcall(m.split, m, { "zeeman" }, {})
    assert.is_false(ok)
    assert.truthy(tostring(err):find("group 'hyperfine' is in neither list", 1, true), err)
  end)

  it("reports bad input clearly", function()
    local m = ls.spin_model()
    local ok, e = pcall(m.add_spin, m, 0.3)
    assert.is_false(ok); assert.truthy(tostring(e):find("positive multiple of 1/2", 1, true), e)
    local s = m:add_spin(0.5)
    ok, e = pcall(m.quadrupole, m, s, { coupling = 1 })
    assert.is_false(ok); assert.truthy(tostring(e):find("needs a spin of 1 or more", 1, true), e)
    ok, e = pcall(m.zeeman, m, s, { principal = { 1, 2 } }, { 0, 0, 1 })
    assert.is_false(ok); assert.truthy(tostring(e):find("principal must be three values", 1, true), e)
    ok, e = pcall(m.zeeman, m, 3, 2, { 0, 0, 1 })
    assert.is_false(ok); assert.truthy(tostring(e):find("site must be a spin number from 1 to 1", 1, true), e)
    ok, e = pcall(m.add_spin, m, 1)
    assert.is_false(ok); assert.truthy(tostring(e):find("add every spin before the first term", 1, true), e)
  end)
end)
