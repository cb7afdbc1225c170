-- The physics of the recipes: each model against a published closed form.
local ls = require "levelshift"

local function rel(expected, got, tol, what)
  local r = math.abs(got - expected) / math.max(math.abs(expected), 1e-300)
  assert(r <= tol, string.format("%s: expected %.15g, got %.15g (relative %.3g > %.3g)",
    what or "value", expected, got, r, tol))
end

local function near(expected, got, tol, what)
  assert(math.abs(got - expected) <= tol, string.format("%s: expected %.15g, got %.15g (|diff| %.3g > %.3g)",
    what or "value", expected, got, math.abs(got - expected), tol))
end

local function sorted(t)
  local c = {}
  for i, v in ipairs(t) do c[i] = v end
  table.sort(c)
  return c
end

describe("recipe anharmonic", function()
  it("reproduces the Bender-Wu quartic coefficients of the ground state", function()
    local g = 0.0385
    local m = ls.recipe("anharmonic", { quartic = g, levels = 60 })
    local s = ls.perturb(m.H0, m.V, { order = 4, levels = { 1 } })
    -- source: Bender & Wu, Phys. Rev. 184, 1231 (1969): E0 = 1/2 + 3/4 g - 21/8 g^2
    -- + 333/16 g^3 - 30885/128 g^4 + ... for p^2/2 + x^2/2 + g x^4
    local c = { 3 / 4, -21 / 8, 333 / 16, -30885 / 128 }
    rel(0.5, s:energy(1, 0), 1e-14, "E0")
    for k = 1, 4 do rel(c[k] * g ^ k, s:energy(1, k), 1e-10, "order " .. k) end
  end)

  it("gives the quartic and cubic second order of every low level", function()
    local q, k3 = 0.0213, 0.0371
    local m = ls.recipe("anharmonic", { quartic = q, cubic = k3, levels = 40 })
    local s = ls.perturb(m.H0, m.V, { order = 2, levels = { 1, 2, 3, 4, 5, 6 } })
    for level = 1, 6 do
      local n = level - 1
      -- source: Bender & Wu (1969), level n: E1 = (3/4)(2n^2+2n+1) g,
      -- E2 = -(1/8)(34n^3+51n^2+59n+21) g^2 (x^4 term; the level-n polynomial
      -- from memory, its n = 0 value -21/8 as in the ground-state series above);
      -- Landau & Lifshitz, Quantum Mechanics, sec. 38 problem 3 (numbers from memory): E2 = -(1/8)(30n^2+30n+11) k^2 (x^3 term);
      -- parity removes the cross term
      local e1 = 0.75 * (2 * n * n + 2 * n + 1) * q
      local e2 = -(34 * n ^ 3 + 51 * n ^ 2 + 59 * n + 21) * q ^ 2 / 8 - (30 * n ^ 2 + 30 * n + 11) * k3 ^ 2 / 8
      rel(e1, s:energy(level, 1), 1e-12, "E1 n=" .. n)
      rel(e2, s:energy(level, 2), 1e-11, "E2 n=" .. n)
    end
  end)

  it("scales with omega (E1 ~ g/omega^2 for x^4)", function()
    local w, g = 1.73, 0.0517
    local m = ls.recipe("anharmonic", { quartic = g, omega = w, levels = 30 })
    local s = ls.perturb(m.H0, m.V, { order = 1, levels = { 1 } })
    -- source: <0|x^4|0> = 3/(4 omega^2) for mass 1, hbar 1 (common practice)
    rel(w / 2, s:energy(1, 0), 1e-14, "E0")
    rel(3 * g / (4 * w ^ 2), s:energy(1, 1), 1e-12, "E1")
  end)
end)

describe("recipe coupled_modes", function()
  it("matches the normal-mode ground energy and its second order", function()
    local w1, w2, c = 1.13, 1.71, 0.287
    local m = ls.recipe("coupled_modes", { omega1 = w1, omega2 = w2, coupling = c, levels = 16 })
    local Om = m.normal_modes()
    -- source: diagonalizing the quadratic potential (common practice):
    -- Omega^2 = (w1^2 + w2^2)/2 -/+ sqrt(((w1^2 - w2^2)/2)^2 + c^2), E0 = (Omega- + Omega+)/2
    local m2 = (w1 ^ 2 + w2 ^ 2) / 2
    local r = math.sqrt(((w1 ^ 2 - w2 ^ 2) / 2) ^ 2 + c ^ 2)
    rel(math.sqrt(m2 - r), Om[1], 1e-14)
    local E = ls.eigen(m.H0 + m.V, { count = 2, vectors = false })
    rel((Om[1] + Om[2]) / 2, E[1], 1e-10, "exact ground")
    rel((Om[1] + Om[2]) / 2 + Om[1], E[2], 1e-9, "first excited = E0 + Omega-")
    local s = ls.perturb(m.H0, m.V, { order = 2, levels = { 1 } })
    -- second order: only |1,1> is reached, <00|x1 x2|11> = 1/(2 sqrt(w1 w2)) (common practice)
    rel(-c ^ 2 / (4 * w1 * w2 * (w1 + w2)), s:energy(1, 2), 1e-12, "E2")
  end)

  it("refuses an unbounded potential", function()
    assert.error_matches(function() ls.recipe("coupled_modes", { omega1 = 1, omega2 = 0.5, coupling = 0.6 }) end,
      "recipe 'coupled_modes': coupling^2 = 0.36 must be below (omega1 omega2)^2 = 0.25", 1, true)
  end)
end)

describe("recipe zeeman", function()
  it("gives g mu_B B m for S = 3/2 in a tilted field", function()
    local B, g = 0.4127, 2.0023193
    local m = ls.recipe("zeeman", { spin = 1.5, field = B, theta = 37.5, phi = 121, gfactor = g, energy_unit = "GHz" })
    -- source: Zeeman levels g mu_B B m, m = -S..S (common practice); mu_B/h = 13.996 244 936 1 GHz/T
    -- (CODATA 2018, Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021))
    local step = g * 13.9962449361 * B
    local E = ls.eigen(m.H0 + m.V, { vectors = false })
    local s = ls.perturb(m.H0, m.V, { order = 2 })
    for i = 1, 4 do
      local mm = i - 1 - 1.5
      rel(step * mm, E[i], 1e-10, "exact m=" .. mm)
      rel(step * mm, s:energy(i, 1), 1e-10, "first order m=" .. mm)
      near(0, s:energy(i, 2), 1e-9 * step, "second order")
      rel(step * mm, m.exact(i), 1e-10, "model.exact")
    end
  end)

  it("takes the field as a frequency or in gauss", function()
    local a = ls.recipe("zeeman", { field = 9.5, field_unit = "GHz", gfactor = 2, energy_unit = "MHz" })
    local E = ls.eigen(a.V, { vectors = false })
    rel(19000, E[2] - E[1], 1e-13, "field given as mu_B B in GHz")     -- g = 2, S = 1/2: splitting 2 * mu_B B
    local b = ls.recipe("zeeman", { field = 1000, field_unit = "G", gfactor = 2, energy_unit = "GHz" })
    E = ls.eigen(b.V, { vectors = false })
    rel(2 * 1.39962449361, E[2] - E[1], 1e-10, "0.1 T") -- mu_B/h in GHz/T, CODATA 2018
  end)
end)

describe("recipe hyperfine", function()
  -- source: Breit & Rabi, Phys. Rev. 38, 2082 (1931), for H = A I.S + gS mu_B B Sz + gI mu_B B Iz:
  -- dW = A (I + 1/2), x = (gS - gI) mu_B B / dW,
  -- E(m) = -dW/(2(2I+1)) + gI mu_B B m +- (dW/2) sqrt(1 + 4 m x/(2I+1) + x^2);
  -- for m = -(I+1/2) the root is taken as (1 - x). Here gI mu_B = -nuclear_g mu_N.
  local function breit_rabi(A, I, bS, bI)
    -- bS = gS mu_B B, bI = gI mu_B B (energies)
    local dW = A * (I + 0.5)
    local x = (bS - bI) / dW
    local out = {}
    local mtop = I + 0.5
    for twom = -2 * mtop, 2 * mtop, 2 do
      local mm = twom / 2
      local base = -dW / (2 * (2 * I + 1)) + bI * mm
      if math.abs(mm) == mtop then
        local root = mm > 0 and (1 + x) or (1 - x)
        out[#out + 1] = base + dW / 2 * root
      else
        local root = math.sqrt(1 + 4 * mm * x / (2 * I + 1) + x * x)
        out[#out + 1] = base + dW / 2 * root
        out[#out + 1] = base - dW / 2 * root
      end
    end
    table.sort(out)
    return out
  end

  it("follows the Breit-Rabi formula for S = 1/2, I = 1/2 over a range of fields", function()
    local u = ls.units
    local A = 1420.405751768 -- MHz, hydrogen 1s (from memory)
    for _, B in ipairs({ 0, 0.0007, 0.013, 0.0507, 0.2, 1.3 }) do
      local m = ls.recipe("hyperfine", { field = B })
      local muB = u.convert(B, "T", "MHz")
      local bS = 2.00231930436256 * muB
      local bI = -5.5856946893 * muB * u.mu_N / u.mu_B
      local ref = breit_rabi(A, 0.5, bS, bI)
      local E = ls.eigen(m.H0 + m.V, { vectors = false })
      for i = 1, 4 do near(ref[i], E[i], 1e-9 * A, string.format("B=%g T level %d", B, i)) end
    end
  end)

  it("follows the Breit-Rabi formula for I = 3/2", function()
    local u = ls.units
    local A, B, gn = 341.78, 0.0217, 1.4782 -- invented values
    local m = ls.recipe("hyperfine", { nuclear_spin = 1.5, hyperfine = A, field = B, nuclear_g = gn })
    local muB = u.convert(B, "T", "MHz")
    local ref = breit_rabi(A, 1.5, 2.00231930436256 * muB, -gn * muB * u.mu_N / u.mu_B)
    local E = ls.eigen(m.H0 + m.V, { vectors = false })
    assert.are.equal(8, #E)
    for i = 1, 8 do near(ref[i], E[i], 1e-9 * A, "level " .. i) end
  end)

  it("is swept from zero field by ls.sweep (H = H0 + p V)", function()
    local m = ls.recipe("hyperfine", { field = 0.0473 })
    local sw = ls.sweep{ H0 = m.H0, V = m.V, from = 0, to = 1, steps = 16 }
    local E = ls.eigen(m.H0 + m.V, { vectors = false })
    local last = #sw.p
    -- integration check (no outside source): the sweep's end point p = 1 is the
    -- model H0 + V itself, whose levels the Breit-Rabi test above checks
    local top = {}
    for k = 1, 4 do top[k] = sw:level(k)[last] end
    top = sorted(top)
    for k = 1, 4 do rel(E[k], top[k], 1e-9, "level " .. k) end
  end)

  it("splits F = 0 and F = 1 by A at zero field", function()
    local m = ls.recipe("hyperfine", { hyperfine = 2.71, field = 0 })
    local E = ls.eigen(m.H0, { vectors = false })
    -- source: A S.I = (A/2)(F(F+1) - S(S+1) - I(I+1)): -3A/4 and A/4 (common practice)
    rel(-3 * 2.71 / 4, E[1], 1e-14)
    for i = 2, 4 do rel(2.71 / 4, E[i], 1e-14) end
  end)
end)

describe("recipe spin_defect", function()
  it("adds the nuclear quadrupole: I = 1 at -e^2qQ/2 and +e^2qQ/4 (twice)", function()
    -- axial quadrupole coupling (Abragam, The Principles of Nuclear Magnetism, 1961, chapter VI)
    local q = 4.945
    local m = ls.recipe("spin_defect", { spin = 0.5, zfs_d = 0, zfs_e = 0, nuclear_spin = 1, hyperfine_par = 0,
      hyperfine_perp = 0, quadrupole = q, field = 0 })
    local E = ls.eigen(m.H0, { vectors = false })
    near(-q / 2, E[1], 1e-12, "m_I = 0"); near(-q / 2, E[2], 1e-12)
    for k = 3, 6 do near(q / 4, E[k], 1e-12, "m_I = +-1") end
  end)

  it("equals the same model built term by term with ls.spin_model", function()
    -- S = 1 with D, E, an axial hyperfine and a quadrupole to a spin-1 nucleus, and the field
    -- tilted: both builders give the same levels (two constructions of one Hamiltonian)
    local p = { spin = 1, zfs_d = 2870, zfs_e = 5, nuclear_spin = 1, hyperfine_par = -2.14, hyperfine_perp = -2.7,
      quadrupole = -4.945, field = 3, field_unit = "mT", theta = 25, phi = 40, gfactor = 2.0028, nuclear_g = 0 }
    local r = ls.recipe("spin_defect", p)
    local m = ls.spin_model()
    local e, n = m:add_spin(1), m:add_spin(1)
    m:zero_field(e, { axial = p.zfs_d, rhombic = p.zfs_e })
    m:hyperfine(e, n, { principal = { p.hyperfine_perp, p.hyperfine_perp, p.hyperfine_par } })
    m:quadrupole(n, { coupling = p.quadrupole })
    local muB = ls.units.convert(p.field, "mT", "MHz")
    local th, ph = math.rad(p.theta), math.rad(p.phi)
    m:zeeman(e, p.gfactor, { muB * math.sin(th) * math.cos(ph), muB * math.sin(th) * math.sin(ph), muB * math.cos(th) })
    local a = ls.eigen(r.H0 + r.V, { vectors = false })
    local b = ls.eigen(m:hamiltonian(), { vectors = false })
    for k = 1, 9 do near(a[k], b[k], 1e-9, "level " .. k) end
  end)

  it("has zero-field levels 0, D - E, D + E for S = 1", function()
    local D, E = 2.3917, 0.1385
    local m = ls.recipe("spin_defect", { zfs_d = D, zfs_e = E, nuclear_spin = 0, field = 0, energy_unit = "GHz" })
    local L = ls.eigen(m.H0 + m.V, { vectors = false })
    -- source: Abragam & Bleaney, Electron Paramagnetic Resonance of Transition Ions (1970):
    -- D(Sz^2 - 2/3) + E(Sx^2 - Sy^2) for S = 1 has levels -2D/3, D/3 - E, D/3 + E
    rel(-2 * D / 3, L[1], 1e-13)
    rel(D - E, L[2] - L[1], 1e-13)
    rel(D + E, L[3] - L[1], 1e-13)
  end)

  it("splits S = 3/2 into two Kramers doublets 2 sqrt(D^2 + 3E^2) apart", function()
    local D, E = 1.173, 0.217
    local m = ls.recipe("spin_defect", { spin = 1.5, zfs_d = D, zfs_e = E, nuclear_spin = 0, field = 0 })
    local L = ls.eigen(m.H0, { vectors = false })
    -- source: Abragam & Bleaney (1970), S = 3/2 zero-field splitting 2 sqrt(D^2 + 3 E^2)
    near(0, L[2] - L[1], 1e-12)
    near(0, L[4] - L[3], 1e-12)
    rel(2 * math.sqrt(D ^ 2 + 3 * E ^ 2), L[3] - L[1], 1e-12)
  end)

  it("moves m = +-1 by +-g mu_B B at first order in a field along z", function()
    local m = ls.recipe("spin_defect", { zfs_d = 2710, zfs_e = 0, nuclear_spin = 0, field = 1.7, theta = 0,
      gfactor = 2.0028, energy_unit = "MHz", field_unit = "mT" })
    local s = ls.perturb(m.H0, m.V, { order = 2 })
    local b = 2.0028 * 13.9962449361 * 1.7 -- MHz: g mu_B B, mu_B/h = 13.996 GHz/T (CODATA 2018)
    -- levels 2, 3 are the m = +-1 pair at D/3; within the split group by ascending correction
    rel(-b, s:energy(2, 1), 1e-10)
    rel(b, s:energy(3, 1), 1e-10)
    near(0, s:energy(1, 1), 1e-12)
  end)

  it("adds the hyperfine term: m_S = +-1 lines split by A_par", function()
    local Ap = 3.1
    local m = ls.recipe("spin_defect", { zfs_d = 2710, zfs_e = 0, hyperfine_par = Ap, hyperfine_perp = 0,
      field = 0, nuclear_spin = 0.5 })
    local L = ls.eigen(m.H0, { vectors = false })
    -- source: first-order hyperfine A_par m_S m_I (common practice); m_S = 0 unshifted
    rel(-2 * 2710 / 3, L[1], 1e-13)
    rel(2710 / 3 - Ap / 2, L[3], 1e-13)
    rel(2710 / 3 + Ap / 2, L[5], 1e-13)
    assert.are.equal(6, #L)
  end)
end)

describe("recipe exchange_pair and spin_chain", function()
  it("gives the Lande interval rule for S1 = 1, S2 = 3/2", function()
    local J = 0.731
    local m = ls.recipe("exchange_pair", { spin1 = 1, spin2 = 1.5, exchange = J, field = 0 })
    local L = ls.eigen(m.H0, { vectors = false })
    -- source: J S1.S2 = (J/2)(S(S+1) - S1(S1+1) - S2(S2+1)), S = 1/2 .. 5/2 (common practice)
    local ref = {}
    for _, S in ipairs({ 0.5, 1.5, 2.5 }) do
      for _ = 1, 2 * S + 1 do ref[#ref + 1] = J / 2 * (S * (S + 1) - 2 - 3.75) end
    end
    ref = sorted(ref)
    assert.are.equal(12, #L)
    for i = 1, 12 do rel(ref[i], L[i], 1e-12, "level " .. i) end
  end)

  it("splits the triplet by g mu_B B m at first order", function()
    local m = ls.recipe("exchange_pair", { exchange = 1.37, field = 0.0413, gfactor1 = 2, gfactor2 = 2 })
    local s = ls.perturb(m.H0, m.V, { order = 2 })
    -- source: singlet -3J/4, triplet J/4 (common practice); Zeeman 2 * field * M
    rel(-0.75 * 1.37, s:energy(1, 0), 1e-13)
    rel(-2 * 0.0413, s:energy(2, 1), 1e-12)
    near(0, s:energy(3, 1), 1e-13)
    rel(2 * 0.0413, s:energy(4, 1), 1e-12)
  end)

  it("has E0 = -2J for a ring of four spins 1/2 and equals the pair for two sites", function()
    local J = 1.29
    local m = ls.recipe("spin_chain", { sites = 4, exchange = J, boundary = "periodic" })
    local L = ls.eigen(m.H0 + m.V, { vectors = false })
    -- source: sum S_i.S_i+1 = S_A.S_B on a 4-ring, lowest at S_A = S_B = 1, S = 0: -2J (common practice)
    rel(-2 * J, L[1], 1e-12)
    local c = ls.recipe("spin_chain", { sites = 2, exchange = J, anisotropy = 0.37, field = 0.11 })
    local p = ls.recipe("exchange_pair", { exchange = J, anisotropy = 0.37, field = 0.055 })
    local a = ls.eigen(c.H0 + c.V, { vectors = false })
    local b = ls.eigen(p.H0 + p.V, { vectors = false })
    for i = 1, 4 do rel(b[i], a[i], 1e-12) end
  end)

  it("limits the chain size with a clear message", function()
    assert.error_matches(function() ls.recipe("spin_chain", { sites = 10, spin = 1.5 }) end,
      "recipe 'spin_chain': (2 spin + 1)^sites = 4^10 = 1048576 states is above the limit of 262144", 1, true)
    assert.error_matches(function() ls.recipe("spin_chain", { sites = 2, boundary = "periodic" }) end,
      "a periodic chain needs at least 3 sites", 1, true)
  end)
end)

describe("recipe qubit_mode", function()
  it("has the Jaynes-Cummings spectrum", function()
    local wq, wm, g = 1.173, 0.981, 0.0437
    local m = ls.recipe("qubit_mode", { omega_qubit = wq, omega_mode = wm, coupling = g, levels = 12 })
    local E = ls.eigen(m.H0 + m.V, { vectors = false })
    -- source: Jaynes & Cummings, Proc. IEEE 51, 89 (1963): E(g,0) = -wq/2,
    -- pairs wm (n + 1/2) -/+ sqrt((wq - wm)^2/4 + g^2 (n + 1))
    local ref = { -wq / 2 }
    for n = 0, 9 do
      local a, b = m.jc_pair(n)
      ref[#ref + 1] = a
      ref[#ref + 1] = b
      local r = math.sqrt((wq - wm) ^ 2 / 4 + g ^ 2 * (n + 1))
      rel(wm * (n + 0.5) - r, a, 1e-14)
    end
    ref = sorted(ref)
    for i = 1, #ref do rel(ref[i], E[i], 1e-12, "level " .. i) end
  end)

  it("gives the dispersive shift chi = g^2/Delta through ls.effective", function()
    local wq, wm, g = 1.371, 1.0, 0.0213
    local m = ls.recipe("qubit_mode", { omega_qubit = wq, omega_mode = wm, coupling = g })
    local lg, le = m.level("g", 0), m.level("e", 0)
    local h = ls.effective(m.H0, m.V, { levels = { lg, le }, order = 2 })
    local E = ls.eigen(h:at(1), { vectors = false })
    -- source: dispersive limit of Jaynes-Cummings (Blais et al., Phys. Rev. A 69, 062320 (2004)):
    -- qubit frequency wq + g^2/Delta, Delta = wq - wm
    rel(wq + g ^ 2 / (wq - wm), E[2] - E[1], 1e-12)
    local e2, g3 = m.level("e", 2), m.level("g", 3)
    local s = ls.perturb(m.H0, m.V, { order = 2, levels = { e2, g3 } })
    rel(3 * g ^ 2 / (wq - wm), s:energy(e2, 2), 1e-12)
    rel(-3 * g ^ 2 / (wq - wm), s:energy(g3, 2), 1e-12)
  end)

  it("adds the Bloch-Siegert shift in the Rabi form", function()
    local wq, wm, g = 1.371, 1.0, 0.0213
    local m = ls.recipe("qubit_mode", { omega_qubit = wq, omega_mode = wm, coupling = g, form = "rabi" })
    local lg, le = m.level("g", 0), m.level("e", 0)
    local s = ls.perturb(m.H0, m.V, { order = 2, levels = { lg, le } })
    -- source: Bloch & Siegert, Phys. Rev. 57, 522 (1940): counter-rotating terms add
    -- g^2/(wq + wm) to the qubit frequency (second order)
    local shift = s:energy(le, 2) - s:energy(lg, 2)
    rel(g ^ 2 / (wq - wm) + g ^ 2 / (wq + wm), shift, 1e-12)
    assert.error_matches(function() m.level("x", 0) end, "qubit state must be \"e\" or \"g\"", 1, true)
    assert.error_matches(function() m.level("e", 99) end, "photon number must be an integer from 0 to 19", 1, true)
  end)
end)

describe("recipe parameters", function()
  local function bad(name, p, text)
    assert.error_matches(function() ls.recipe(name, p) end, text, 1, true)
  end
  it("refuses spins that are not multiples of 1/2", function()
    bad("zeeman", { spin = 0.3 }, "recipe 'zeeman': parameter 'spin' must be a multiple of 1/2 (got 0.3)")
    bad("spin_defect", { nuclear_spin = 0.7 }, "parameter 'nuclear_spin' must be a multiple of 1/2 (got 0.7)")
    bad("spin_defect", { nuclear_spin = -0.5 }, "parameter 'nuclear_spin' must not be negative (got -0.5)")
    bad("exchange_pair", { spin2 = 0 }, "parameter 'spin2' must be a positive multiple of 1/2 (got 0)")
    bad("hyperfine", { nuclear_spin = 1.25 }, "parameter 'nuclear_spin' must be a multiple of 1/2 (got 1.25)")
  end)
  it("refuses negative masses and frequencies", function()
    bad("linear_force", { mass = -1.5 }, "recipe 'linear_force': parameter 'mass' must be positive (got -1.5)")
    bad("anharmonic", { omega = -1 }, "recipe 'anharmonic': parameter 'omega' must be positive (got -1)")
    bad("qubit_mode", { omega_mode = 0 }, "parameter 'omega_mode' must be positive (got 0)")
    bad("coupled_modes", { omega2 = -0.2 }, "parameter 'omega2' must be positive (got -0.2)")
  end)
  it("lists the accepted names and choices", function()
    bad("zeeman", { S = 1 }, "recipe 'zeeman': unknown parameter 'S' (accepted: spin, field, field_unit, theta, phi, gfactor, energy_unit)")
    bad("zeeman", { field_unit = "tesla" }, "parameter 'field_unit' must be one of T, mT, uT, G, GHz")
    bad("qubit_mode", { form = "dicke" }, "parameter 'form' must be one of jc, rabi (got dicke)")
    bad("spin_chain", { boundary = "ring" }, "parameter 'boundary' must be one of open, periodic (got ring)")
  end)
end)

describe("recipes under hostile parameters", function()
  it("either build a model or raise a string error naming the recipe", function()
    -- common practice for a binding: no input crashes, every error is a clear string
    local mine = { "linear_force", "anharmonic", "coupled_modes", "zeeman", "hyperfine", "spin_defect",
      "exchange_pair", "spin_chain", "qubit_mode" }
    local vals = { 0, -1, 0.3, 2.5, 0 / 0, math.huge, -math.huge, 1e18, -1e18, "x", "GHz", {}, true, 7 }
    math.randomseed(20261202)
    local bad = {}
    for _, name in ipairs(mine) do
      local def = ls.recipes.info(name)
      for _, pd in ipairs(def.params) do
        for _, v in ipairs(vals) do
          local ok, err = pcall(ls.recipe, name, { [pd.name] = v })
          if not ok and (type(err) ~= "string" or not err:find("recipe '" .. name .. "'", 1, true)) then
            bad[#bad + 1] = name .. "." .. pd.name .. "=" .. tostring(v) .. ": " .. tostring(err)
          end
          if ok then assert.is_truthy(err.H0 and err.V and err.basis) end
        end
      end
    end
    assert.are.same({}, bad)
  end)
end)

describe("charge basis and recipe charge_qubit", function()
  it("has the Mathieu characteristic values as exact levels (n_g = 0)", function()
    -- H/E_C = 4 n^2 - (E_J/E_C) cos(phi) is Mathieu's equation with q = E_J/(2 E_C)
    -- (Koch et al., Phys. Rev. A 76, 042319 (2007), eq. (2.4)): E_0 = a_0(q),
    -- E_1 = b_2(q), E_2 = a_2(q). a_0(1) = -0.45513860, a_0(5) = -5.80004602
    -- (Abramowitz & Stegun, Handbook, 1964, Table 20.1); all values below from
    -- scipy.special.mathieu_a / mathieu_b (SciPy 1.10.1, Debian 12), which
    -- agree with the table to its 8 digits.
    local ref = {
      [1] = { -0.45513860410741364, 3.917024772998471, 4.371300982735086 },
      [5] = { -5.800046020851508, 2.0994604454866654, 7.449109739529177 },
      [25] = { -40.25677954656679, -21.314860622249853, -3.5221647271582945 },
    }
    for q, want in pairs(ref) do
      local m = ls.recipe("charge_qubit", { E_C = 1, E_J = 2 * q, n_g = 0, N = 30 })
      local E = m.exact(3)
      for k = 1, 3 do near(want[k], E[k], 1e-9, "q = " .. q .. ", level " .. k) end
    end
  end)

  it("splits the sweet spot n_g = 1/2 by E_J at first order, with the second order of the far charges", function()
    -- at n_g = 1/2 the charge states 0 and 1 are degenerate (4 E_C (1/2)^2 = E_C); V = -E_J cos(phi)
    -- couples them by -E_J/2: first order -+E_J/2 (Bouchiat et al., Phys. Scr. T76, 165 (1998));
    -- second order: each couples to its far neighbour (n = -1 or 2, at 9 E_C) by -E_J/2:
    -- (E_J/2)^2 / (E_C - 9 E_C) (the nondegenerate formula, common practice)
    local EC, EJ = 0.3, 0.02
    local m = ls.recipe("charge_qubit", { E_C = EC, E_J = EJ, n_g = 0.5, N = 8 })
    local s = ls.perturb(m.H0, m.V, { order = 3, levels = { 1, 2 } })
    near(EC, s:energy(1, 0), 1e-14, "E(0)")
    near(-EJ / 2, s:energy(1, 1), 1e-14, "lower, first order")
    near(EJ / 2, s:energy(2, 1), 1e-14, "upper, first order")
    near((EJ / 2) ^ 2 / (EC - 9 * EC), s:energy(1, 2), 1e-15, "second order")
    near(m.sweet_spot_gap(), s:energy(2, 1) - s:energy(1, 1), 1e-14, "gap")
    local E = m.exact(2)
    near(EJ, E[2] - E[1], 1e-3 * EJ, "exact gap") -- the far charges move both levels alike
  end)

  it("gives the transmon's plasma line and anharmonicity at first order", function()
    -- E_01 = sqrt(8 E_J E_C) - E_C and E_12 - E_01 = -E_C at first order in the quartic term
    -- (Koch et al. 2007, eqs. (2.11), (2.12)); the exact charge-basis values at E_J/E_C = 50
    -- are within a few percent (the higher terms of cos(phi) and of the series)
    local EC, EJ = 0.25, 12.5
    local m = ls.recipe("charge_qubit", { E_C = EC, E_J = EJ, regime = "transmon", levels = 40, N = 30 })
    local s = ls.perturb(m.H0, m.V, { order = 1, levels = { 1, 2, 3 } })
    local wp = math.sqrt(8 * EJ * EC)
    local E = {}
    for k = 1, 3 do E[k] = s:energy(k, 0) + s:energy(k, 1) end
    near(wp - EC, E[2] - E[1], 1e-12, "E_01")
    near(-EC, (E[3] - E[2]) - (E[2] - E[1]), 1e-12, "anharmonicity")
    local X = m.exact(3)
    rel(wp - EC, X[2] - X[1], 0.01, "exact E_01")
    rel(-EC, (X[3] - X[2]) - (X[2] - X[1]), 0.2, "exact anharmonicity")
  end)

  it("adds a resonator: uncoupled levels are sums, coupled ones stay Hermitian and real", function()
    -- coupling 0: the levels are qubit levels plus k omega_r (common practice)
    local m0 = ls.recipe("charge_qubit", { E_C = 0.3, E_J = 6, n_g = 0.2, N = 12, photons = 4, omega_r = 5,
      coupling = 0 })
    local q = ls.recipe("charge_qubit", { E_C = 0.3, E_J = 6, n_g = 0.2, N = 12 }).exact(3)
    local sums = {}
    for a = 1, 3 do for k = 0, 3 do sums[#sums + 1] = q[a] + 5 * k end end
    table.sort(sums)
    local E = m0.exact(4)
    for k = 1, 4 do near(sums[k], E[k], 1e-10, "level " .. k) end
    local m = ls.recipe("charge_qubit", { E_C = 0.3, E_J = 6, n_g = 0.2, N = 12, photons = 4, omega_r = 5,
      coupling = 0.05 })
    assert.is_true((m.H0 + m.V):is_hermitian())
  end)

  it("has charge-basis operators with the commutator of conjugate variables", function()
    -- [n, e^{i phi}] = e^{i phi} exactly, also truncated; cos^2 + sin^2 = 1 away from the edge
    -- (common practice); sin is Hermitian
    local C = ls.charge(5)
    local comm = C.n * C.raise - C.raise * C.n - C.raise
    local worst = 0
    for i = 1, 11 do for j = 1, 11 do
      local re, im = comm:get(i, j)
      worst = math.max(worst, math.abs(re), math.abs(im))
    end end
    assert.are.equal(0, worst)
    local one = C.cos * C.cos + C.sin * C.sin
    for i = 2, 10 do
      local re, im = one:get(i, i)
      near(1, re, 1e-15, "cos^2 + sin^2 at " .. i)
      near(0, im, 1e-15)
    end
    assert.is_true((C.sin):is_hermitian())
    assert.are.equal(-5, C:labels(1).n)
    local ok, e = pcall(function() return C.tan end)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("charge basis has no operator 'tan'", 1, true), e)
    ok, e = pcall(ls.charge, 0)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("N must be at least 1", 1, true), e)
  end)
end)

describe("functions of an operator and recipe morse", function()
  it("gives exp(-alpha x) with the ground-state value exp(alpha^2/4)", function()
    -- <0|exp(-alpha x)|0> = exp(alpha^2/4) for x = (a + a^+)/sqrt(2) (the Gaussian ground
    -- state's moment generating function; common practice); <1|..|1> = (1 + alpha^2/2) exp(alpha^2/4)
    local o = ls.oscillator(30, { pad = 60 })
    for _, al in ipairs { 0.3, 1.0 } do
      local E = o.x:fn(function(x) return math.exp(-al * x) end)
      rel(math.exp(al * al / 4), E:get(1, 1), 1e-12, "<0|exp|0>, alpha " .. al)
      rel((1 + al * al / 2) * math.exp(al * al / 4), E:get(2, 2), 1e-12, "<1|exp|1>, alpha " .. al)
    end
    -- a polynomial of x equals the op's own power inside the kept levels
    local X2 = o.x:fn(function(x) return x * x end)
    local ref = o.x ^ 2
    for i = 1, 30 do near(ref:get(i, i), X2:get(i, i), 1e-11, "x^2 at " .. i) end
    -- a product with f(x) would reach past the padding: refused
    local ok, e = pcall(function() return X2 * o.x end)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("beyond the padding", 1, true), e)
    ok, e = pcall(function() return ls.matrix { { 1, 2 }, { 3, 4 } }:fn(math.exp) end)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("fn: matrix is not Hermitian", 1, true), e)
    ok, e = pcall(function() return o.x:fn(function() return 0 / 0 end) end)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("fn: the function returned NaN", 1, true), e)
  end)

  it("has the exact Morse levels in a large enough basis", function()
    -- E_n = omega (n + 1/2) - omega^2 (n + 1/2)^2 / (4 D), omega = a sqrt(2 D)
    -- (Morse, Phys. Rev. 34, 57 (1929))
    local m = ls.recipe("morse", { D = 10, a = 0.5, levels = 150, pad = 100 })
    assert.are.equal(9, m.bound)
    local E = m.exact(6)
    for n = 0, 5 do near(m.level_exact(n), E[n + 1], 1e-8, "level " .. n) end
  end)

  it("gets the anharmonic constant at second order, the error falling like a^3", function()
    -- E_1 - E_0 = omega - a^2 (Morse 1929); the order-2 series holds the cubic (second
    -- order) and quartic (first order) terms, so its error is of the next order: with
    -- omega ~ a it falls by 8 when a halves (Dunham, Phys. Rev. 41, 721 (1932))
    local err = {}
    for k, a in ipairs { 0.05, 0.025 } do
      local m = ls.recipe("morse", { D = 10, a = a, levels = 40 })
      local s = ls.perturb(m.H0, m.V, { order = 2, levels = { 1, 2 } })
      err[k] = (s:at(2, 1) - s:at(1, 1)) - (m.level_exact(1) - m.level_exact(0))
    end
    local ratio = err[1] / err[2]
    assert.is_true(ratio > 7.5 and ratio < 8.5, "error ratio " .. ratio)
  end)
end)

describe("force fields (ls.force_field)", function()
  it("takes a Fermi resonance together: the first order is the 2x2 of the pair", function()
    -- omega_1 ~ 2 omega_2 with the cubic term phi q1 q2^2: |1,0> and |0,2> are coupled by
    -- W = phi <1|q|0><0|q^2|2> = phi/2 (q = (a + a^+)/sqrt 2), and degenerate perturbation theory
    -- gives mean -+ sqrt((E10 - E02)^2/4 + W^2) at first order (Fermi, Z. Phys. 71, 250 (1931);
    -- Herzberg, Infrared and Raman Spectra, 1945)
    local w1, w2, phi = 2.0, 1.01, 0.02
    local ff = ls.force_field { omegas = { w1, w2 }, levels = 8, cubic = { { 1, 2, 2, phi } } }
    local s = ls.perturb(ff.H0, ff.V3, { order = 1, levels = { 3, 4 } })
    local E10, E02 = 1.5 * w1 + 0.5 * w2, 0.5 * w1 + 2.5 * w2
    local mean, half, W = (E10 + E02) / 2, (E10 - E02) / 2, phi / 2
    near(mean - math.sqrt(half ^ 2 + W ^ 2), s:at(3, 1), 1e-13, "lower")
    near(mean + math.sqrt(half ^ 2 + W ^ 2), s:at(4, 1), 1e-13, "upper")
    -- to order 4 the pair meets the exact levels of H0 + V3 (common practice: the check)
    local s4 = ls.perturb(ff.H0, ff.V3, { order = 4, levels = { 3, 4 } })
    local E = ls.eigen(ff.H0 + ff.V3, { count = 4, vectors = false })
    near(E[3], s4:at(3, 1), 1e-8, "order 4, lower")
    near(E[4], s4:at(4, 1), 1e-8, "order 4, upper")
  end)

  it("takes a Darling-Dennison pair together: |2,0> and |0,2> split by the q1^2 q2^2 term", function()
    -- omega1 ~ omega2 and K q1^2 q2^2: |2,0>, |0,2> coupled by W = K <2|q^2|0><0|q^2|2> = K/2, both
    -- moved by K <2|q^2|2><0|q^2|0> = 5K/4 at first order, while |1,1> (between them) is not coupled
    -- to either (Darling & Dennison, Phys. Rev. 57, 128 (1940))
    local w1, w2, K = 1.0, 1.004, 0.01
    local ff = ls.force_field { omegas = { w1, w2 }, levels = 10, quartic = { { 1, 1, 2, 2, K } } }
    local s = ls.perturb(ff.H0, ff.V4, { order = 1, levels = { 4, 5, 6 } })
    local E20, E02 = 2.5 * w1 + 0.5 * w2, 0.5 * w1 + 2.5 * w2
    local mean, half, W = (E20 + E02) / 2 + 5 * K / 4, (E20 - E02) / 2, K / 2
    near(mean - math.sqrt(half ^ 2 + W ^ 2), s:at(4, 1), 1e-13, "lower of the pair")
    near(mean + math.sqrt(half ^ 2 + W ^ 2), s:at(6, 1), 1e-13, "upper of the pair")
    near(1.5 * w1 + 1.5 * w2 + K * 1.5 * 1.5, s:at(5, 1), 1e-13, "|1,1>")
  end)

  it("gives the quartic first order of one mode and refuses bad terms", function()
    -- <n|q^4|n> = (6 n^2 + 6 n + 3)/4 (common practice)
    local ff = ls.force_field { omegas = { 1.3 }, levels = 12, quartic = { { 1, 1, 1, 1, 0.01 } } }
    local s = ls.perturb(ff.H0, ff.V4, { order = 1, levels = { 1, 2, 3 } })
    for n = 0, 2 do near(0.01 * (6 * n * n + 6 * n + 3) / 4, s:energy(n + 1, 1), 1e-15, "n = " .. n) end
    local ok, e = pcall(ls.force_field, { omegas = { 1 }, cubic = { { 1, 2, 2, 0.1 } } })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("mode 2 is not from 1 to 1", 1, true), e)
    ok, e = pcall(ls.force_field, { omegas = { -1 } })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("omegas[1] must be positive", 1, true), e)
  end)
end)
