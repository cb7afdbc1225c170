-- ls.floquet: a drive V cos(omega t) in the extended (Floquet) space; its
-- series gives the ac Stark shift, its eigenvalues the quasienergies.
local ls = require "levelshift"

local function near(want, got, tol, what)
  assert(math.abs(got - want) <= tol,
    string.format("%s: expected %.15g, got %.15g (|diff| %.3g > %.3g)", what or "value", want, got,
      math.abs(got - want), tol))
end

describe("floquet", function()
  local D, w = 1.0, 0.37
  local H0 = ls.matrix { { 0, 0 }, { 0, D } }
  local X = ls.matrix { { 0, 1 }, { 1, 0 } }

  it("gives the ac Stark shift of a two-level system at second order", function()
    -- H = H0 + F X cos(omega t): the ground level moves by -(F^2/4) [1/(D - w) + 1/(D + w)]
    -- (second order in the drive; e.g. Autler & Townes, Phys. Rev. 100, 703 (1955); common
    -- practice), which is -alpha(omega) F^2/4 with the dynamic polarizability
    local F = ls.floquet { H0 = H0, V = X, omega = w, harmonics = 6 }
    local s, idx = F:shift(1, 2)
    local want = -0.25 * (1 / (D - w) + 1 / (D + w))
    near(0, s:energy(idx, 0), 1e-15, "unperturbed")
    near(want, s:energy(idx, 2), 1e-13, "second order")
    local alpha = ls.polarizability(H0, X, { level = 1, omega = w })
    near(-alpha / 4, s:energy(idx, 2), 1e-13, "= -alpha/4")
  end)

  it("has quasienergies that the series approaches, folded and converged in M", function()
    local amp = 0.05
    local G = ls.floquet { H0 = H0, V = amp * X, omega = w, harmonics = 8 }
    local q = G:quasienergies(2)
    assert.are.equal(1, q[1].level)
    assert.is_true(q[1].weight > 0.99)
    for _, e in ipairs(q) do assert.is_true(e.value >= -w / 2 and e.value < w / 2) end
    local S = ls.floquet { H0 = H0, V = X, omega = w, harmonics = 8 }
    local s, idx = S:shift(1, 4)
    -- the series in the amplitude to order 4 leaves an error of order amp^6 (common practice)
    near(q[1].value, s:at(idx, amp), 10 * amp ^ 6, "quasienergy vs series")
    assert.is_true(G:convergence(2) < 1e-12)
  end)

  it("refuses bad input", function()
    local ok, e = pcall(ls.floquet, { H0 = H0, V = X, omega = -1 })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("omega must be a positive number", 1, true), e)
    ok, e = pcall(ls.floquet, { H0 = H0, V = ls.matrix { { 1 } }, omega = 1 })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("V must be an op of H0's size", 1, true), e)
  end)
  it("turns a polarizability into a light shift in laboratory units", function()
    -- shift = -alpha I / (2 c eps0); the atomic unit of polarizability is 1.64877727436e-41
    -- C^2 m^2 J^-1 (CODATA 2018, Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021))
    local u = ls.units
    local want = -1.64877727436e-41 * 1 / (2 * u.c * u.eps_0) / u.h
    local got = ls.light_shift(1, { intensity = 1, intensity_unit = "W/m^2", energy_unit = "Hz" })
    assert.is_true(math.abs(got - want) <= 1e-9 * math.abs(want), got .. " vs " .. want)
    -- SI in, the same number; W/cm^2 is 1e4 W/m^2
    local si = ls.light_shift(1.64877727436e-41, { intensity = 1e-4, alpha_unit = "SI", energy_unit = "Hz" })
    assert.is_true(math.abs(si - want) <= 1e-9 * math.abs(want))
    local ok, e = pcall(ls.light_shift, 1, { intensity = 1, intensity_unit = "lux" })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("intensity_unit must be", 1, true), e)
  end)
end)
