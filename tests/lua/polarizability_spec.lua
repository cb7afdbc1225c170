-- ls.polarizability: the dynamic polarizability alpha(omega) of one level,
-- by the spectral sum (every eigenpair) or by Dalgarno-Lewis solves with the
-- reduced resolvent (large sparse H0), against closed forms.
local ls = require "levelshift"

local function near(want, got, tol, what)
  assert(math.abs(got - want) <= tol,
    string.format("%s: expected %.15g, got %.15g (|diff| %.3g > %.3g)", what or "value", want, got,
      math.abs(got - want), tol))
end

describe("polarizability", function()
  it("of the oscillator's ground state is 1/(omega0^2 - omega^2)", function()
    -- one dipole transition, |x_01|^2 = 1/(2 omega0) (hbar = m = 1): alpha = 2 |x_01|^2 omega0 /
    -- (omega0^2 - omega^2), the Lorentz oscillator (common practice)
    for _, w0 in ipairs { 1, 2.5 } do
      local o = ls.oscillator(20)
      local s = 1 / math.sqrt(w0) -- x of frequency w0 from the dimensionless one
      local H0, D = w0 * (o.number + 0.5), s * o.x
      local ws = { 0, 0.3 * w0, 0.9 * w0, 1.7 * w0 }
      local a, info = ls.polarizability(H0, D, { level = 1, omegas = ws })
      for k, w in ipairs(ws) do near(1 / (w0 * w0 - w * w), a[k], 1e-12 / w0 ^ 2, "omega " .. w) end
      near(w0, info.first_resonance, 1e-12, "first resonance")
      assert.are.equal(1, info.poles)
      assert.are.equal("spectral", info.method)
      assert.truthy(info.note:find("1 of 4 frequencies", 1, true), info.note) -- 1.7 omega0 is above
    end
  end)

  it("is complex with a width, and a pole without one is an error", function()
    -- alpha = |x_01|^2 [1/(w0 - w - i g/2) + 1/(w0 + w + i g/2)] (the damped oscillator)
    local o = ls.oscillator(12)
    local g, w = 0.1, 0.97
    local a = ls.polarizability(o.number + 0.5, o.x, { level = 1, omega = w, width = g })
    local want = 0.5 * (1 / (1 - w - 0.5 * g * ls.I) + 1 / (1 + w + 0.5 * g * ls.I))
    near(want.re, a.re, 1e-12, "re")
    near(want.im, a.im, 1e-12, "im")
    local ok, e = pcall(ls.polarizability, o.number + 0.5, o.x, { level = 1, omega = 1 })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("is on the resonance with level 2", 1, true), e)
    ok, e = pcall(ls.polarizability, o.number + 0.5, o.x, { level = 1, omega = 0.5, width = 0.1, method = "solves" })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("a width needs the spectral path", 1, true), e)
    ok, e = pcall(ls.polarizability, o.number + 0.5, o.x, { level = 1 })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("give omega = w or omegas", 1, true), e)
  end)

  it("gives the same numbers by the solves as by the spectral sum", function()
    -- an anharmonic oscillator (x^4) of 400 levels; level 2 too (a lower state below it)
    local o = ls.oscillator(400)
    local H0 = o.number + 0.5 + 0.01 * o.x ^ 4
    for _, lev in ipairs { 1, 2 } do
      local a = ls.polarizability(H0, o.x, { level = lev, omegas = { 0, 0.4 }, method = "spectral" })
      local b = ls.polarizability(H0, o.x, { level = lev, omegas = { 0, 0.4 }, method = "solves" })
      for k = 1, 2 do near(a[k], b[k], 1e-10 * math.abs(a[k]), "level " .. lev .. " omega " .. k) end
    end
  end)

  it("of hydrogen's ground state is 9/2 a.u. (static limit, radial grid)", function()
    -- alpha(0) = 9/2 e^2 a0^3 / E_h, exact (Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955));
    -- the grid of 6000 points on r < 40 gives it within 1e-3; 1s -> p channel by z = r cos(theta),
    -- <Y10|cos(theta)|Y00> = 1/sqrt(3)
    local H0, r = ls.radial(6000, { rmax = 40, l = { 0, 1 } })
    local z = r / math.sqrt(3)
    local D = ls.blocks { { 0, z }, { z, 0 } }
    local a, info = ls.polarizability(H0, D, { level = 1, omega = 0 })
    assert.are.equal("solves", info.method)
    near(4.5, a, 5e-3, "alpha(0)")
    near(-0.5, info.energy, 1e-3, "E(1s)")
    -- alpha rises towards the 1s -> 2p line at 3/8 a.u. (Lyman alpha)
    local b = ls.polarizability(H0, D, { level = 1, omegas = { 0.1, 0.2, 0.3 } })
    assert.is_true(b[1] > a and b[2] > b[1] and b[3] > b[2])
  end)
  it("finds the magic frequency of two two-level systems (closed form)", function()
    -- level a (E = 0) coupled by d1 to a state w1 above, level b (E = 0.2) by d2 to one w2 above:
    -- alpha_a = 2 d1^2 w1/(w1^2 - w^2), alpha_b = 2 d2^2 w2/(w2^2 - w^2); equal at
    -- w^2 = (d2^2 w2 w1^2 - d1^2 w1 w2^2)/(d2^2 w2 - d1^2 w1) (algebra, common practice)
    local w1, w2, d1, d2 = 1.0, 1.5, 1.0, 1.3
    local H0 = ls.matrix { { 0, 0, 0, 0 }, { 0, 0.2, 0, 0 }, { 0, 0, w1, 0 }, { 0, 0, 0, 0.2 + w2 } }
    local D = ls.matrix { { 0, 0, d1, 0 }, { 0, 0, 0, d2 }, { d1, 0, 0, 0 }, { 0, d2, 0, 0 } }
    local want = math.sqrt((d2 ^ 2 * w2 * w1 ^ 2 - d1 ^ 2 * w1 * w2 ^ 2) / (d2 ^ 2 * w2 - d1 ^ 2 * w1))
    local m = ls.magic_frequencies(H0, D, { levels = { 1, 2 }, from = 0, to = 3 })
    assert.are.equal(1, #m)
    near(want, m[1], 1e-14, "magic frequency")
    local a = ls.polarizability(H0, D, { level = 1, omega = m[1] })
    local b = ls.polarizability(H0, D, { level = 2, omega = m[1] })
    near(a, b, 1e-12 * math.abs(a), "equal polarizabilities")
    local ok, e = pcall(ls.magic_frequencies, H0, D, { levels = { 1, 1 }, to = 3 })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("two different levels", 1, true), e)
    ok, e = pcall(ls.magic_frequencies, H0, D, { levels = { 1, 2 } })
    assert.is_false(ok)
    assert.truthy(tostring(e):find("option 'to'", 1, true), e)
  end)
end)
