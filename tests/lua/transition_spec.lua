-- transition_spec.lua -- ls.transition and ls.pulse (hbar = 1).
local ls = require "levelshift"

local function near(a, b, tol, what)
  assert(math.abs(a - b) <= tol, string.format("%s: got %.12g, want %.12g (tol %.3g)", what or "value", a, b, tol))
end

local function raises(f, pattern)
  local ok, err = pcall(f)
  assert(not ok, "expected an error matching '" .. pattern .. "'")
  assert(tostring(err):find(pattern, 1, true), "error '" .. tostring(err) .. "' does not contain '" .. pattern .. "'")
end

-- complex helpers on {re, im} pairs
local function cmul(a, b) return { a[1] * b[1] - a[2] * b[2], a[1] * b[2] + a[2] * b[1] } end
local function cconj(a) return { a[1], -a[2] } end
local function cadd(a, b) return { a[1] + b[1], a[2] + b[2] } end
local function cexpi(x) return { math.cos(x), math.sin(x) } end

describe("pulses", function()
  it("evaluate as written", function()
    local g = ls.pulse.gaussian{amplitude = 2, center = 1, width = 0.5}
    near(g(1), 2, 1e-15, "gaussian peak") -- from memory
    near(g(1.5), 2 * math.exp(-0.5), 1e-15, "gaussian at one width") -- from memory
    local s = ls.pulse.square{amplitude = 3, start = 0, stop = 1}
    near(s(0.5), 3, 0, "square inside"); near(s(2), 0, 0, "square outside") -- common practice
    local r = ls.pulse.ramp{from = -1, to = 1, start = 0, stop = 2}
    near(r(-5), -1, 0, "ramp before"); near(r(1), 0, 1e-15, "ramp middle"); near(r(9), 1, 0, "ramp after")
    local sn = ls.pulse.sine{amplitude = 2, omega = 3, phase = 0.1, envelope = s}
    near(sn(0.5), 2 * math.sin(1.6) * 3, 1e-14, "sine times envelope") -- common practice
    near((g + s)(0.5), g(0.5) + 3, 1e-15, "sum of pulses") -- common practice
  end)
  it("reject bad parameters", function()
    raises(function() ls.pulse.gaussian{amplitude = 1, center = 0, width = -1} end, "width must be > 0")
    raises(function() ls.pulse.gaussian{amplitude = 1, center = 0} end, "'width' is required")
    raises(function() ls.pulse.square{start = 1, stop = 0} end, "must exceed start")
    raises(function() ls.pulse.sine{omega = "x"} end, "must be a number")
    raises(function() ls.pulse.gaussian{width = 1, wdith = 2} end, "unknown option")
  end)
end)

describe("transition: oscillator under a Gaussian force", function()
  -- H = n + 1/2 - f(t) x, f(t) = f0 exp(-t^2/(2 w^2)); alpha = (1/sqrt2) int f e^{it} dt
  -- = (1/sqrt2) f0 w sqrt(2 pi) exp(-w^2/2) (Gaussian Fourier integral, from memory).
  local N, f0, w = 14, 0.2, 1.0
  local B = ls.oscillator(N)
  local pulse = ls.pulse.gaussian{amplitude = f0, center = 0, width = w}
  local tr = ls.transition{H0 = B.number, V = -1 * B.x, pulse = pulse, from = 1,
                           t0 = -math.huge, t1 = math.huge, order = 2, steps = 4000}
  local alpha = f0 * w * math.sqrt(math.pi) * math.exp(-w * w / 2)
  local a2 = alpha * alpha
  it("first order gives |alpha|^2", function()
    -- METHODS.md section 6, a_f(1); Glauber, Phys. Rev. 131, 2766 (1963), displacement amplitude
    near(tr:probability(2, 1), a2, 1e-10, "P1(0->1)")
    assert(tr:error(2) < 1e-8, "Filon error estimate " .. tr:error(2))
    near(tr:probability(3, 1), 0, 1e-30, "no direct 0->2 at first order") -- x couples n to n+-1
  end)
  it("second order gives the two-quantum amplitude alpha^2/sqrt2", function()
    -- Glauber, Phys. Rev. 131, 2766 (1963), Eq. (3.7) expanded to lowest order: |<2|alpha>|^2 ~ |alpha|^4/2
    -- cumulative linear-Filon quadrature is second order in h: 3e-5 relative at 4000 steps
    near(tr:probability(3, 2), a2 * a2 / 2, 1e-7, "P2(0->2)")
  end)
  it("second order refines its own grid when steps is left out", function()
    -- same source; the default grid doubles until halving changes a2 by < 1e-4 relative
    local d = ls.transition{H0 = B.number, V = -1 * B.x, pulse = pulse, from = 1,
                            t0 = -math.huge, t1 = math.huge, order = 2}
    near(d:probability(2, 1), a2, 1e-8 * a2, "P1(0->1), default grid")
    near(d:probability(3, 2), a2 * a2 / 2, 2e-4 * a2 * a2 / 2, "P2(0->2), default grid")
    assert(d:warnings() == "", d:warnings())
  end)
  it("exact propagation gives the Poisson law", function()
    local ex = tr:exact()
    -- Glauber, Phys. Rev. 131, 2766 (1963): P(n) = |alpha|^{2n} e^{-|alpha|^2}/n!
    near(ex:probability(2), a2 * math.exp(-a2), 1e-9, "P(0->1) exact")
    near(ex:probability(3), a2 * a2 / 2 * math.exp(-a2), 1e-9, "P(0->2) exact")
    near(ex:probability(1), math.exp(-a2), 1e-9, "P(0->0) exact")
    assert(ex:error(2) < 1e-8)
  end)
  it("warns when first order is not small", function()
    local big = ls.transition{H0 = B.number, V = -1 * B.x, from = 1, t0 = -math.huge, t1 = math.huge,
                              pulse = ls.pulse.gaussian{amplitude = 1.0, center = 0, width = 1}}
    assert(big:warnings():find("exceeds 0.1", 1, true), "warning expected") -- common practice
    assert(big.warning ~= nil)
    big:exact()
    assert(big:warnings():find("disagree", 1, true), "disagreement warning expected")
    assert(tr:warnings() == "" or not tr:warnings():find("exceeds", 1, true))
  end)
  it("handles 200 levels and 20000 samples (the benchmark job) against the Gaussian integral", function()
    -- H = n + 1/2 + f(t) x, f = f0 exp(-((t - 10)/tau)^2) on [0, 20]: first order
    -- P(0->1) = |x_10|^2 |int f e^{it} dt|^2 = (1/2) (f0 tau sqrt(pi) e^{-tau^2/4})^2
    -- (Gaussian Fourier integral, Abramowitz & Stegun 7.4.6; the cut at +-5 tau
    -- changes it by erfc(5) ~ 1.5e-12 relative)
    local B2 = ls.oscillator(201)
    local f0, tau = 0.1, 2.0
    local big = ls.transition{H0 = B2.number + 0.5, V = B2.x, from = 1, t0 = 0, t1 = 20, steps = 20000,
                              pulse = ls.pulse.gaussian{amplitude = f0, center = 10, width = tau / math.sqrt(2)}}
    local want = 0.5 * (f0 * tau * math.sqrt(math.pi) * math.exp(-tau * tau / 4)) ^ 2
    near(big:probability(2, 1), want, 1e-11 * want, "P1(0->1), 200 levels")
    assert(big:dim() == 201 and big:steps() == 20000)
    for f = 3, 201 do assert(big:probability(f, 1) == 0) end -- x couples n to n +- 1 only
    assert(big:error(2) < 1e-12, "Filon error estimate " .. big:error(2))
    -- exact to a tolerance: second order of the displaced oscillator, P(0->1) = |alpha|^2 e^{-|alpha|^2}
    -- (Glauber, Phys. Rev. 131, 2766 (1963)); here |alpha|^2 = want
    local ex = big:exact{tol = 1e-10}
    near(ex:probability(2), want * math.exp(-want), 1e-10, "exact P(0->1), 200 levels")
    assert(ex:error(2) <= 1e-10)
  end)
end)

describe("transition: Rabi problem", function()
  -- H = 1/2 [[-D, W], [W, D]] on from t = 0; Rabi, Phys. Rev. 51, 652 (1937):
  -- P = W^2/(W^2 + D^2) sin^2(sqrt(W^2 + D^2) t / 2)
  local function rabi(W, D, t)
    local R = math.sqrt(W * W + D * D)
    return W * W / (R * R) * math.sin(R * t / 2) ^ 2
  end
  local D, T = 1.0, 7.3
  local H0 = ls.matrix{{-D / 2, 0}, {0, D / 2}}
  it("exact propagation matches the Rabi formula", function()
    local W = 0.8
    local tr = ls.transition{H0 = H0, V = ls.matrix{{0, W / 2}, {W / 2, 0}}, from = 1, t0 = 0, t1 = T,
                             pulse = ls.pulse.square{amplitude = 1, start = 0, stop = T}, steps = 400}
    near(tr:exact():probability(2), rabi(W, D, T), 1e-8, "P exact") -- Rabi (1937)
  end)
  it("first order matches the small-coupling limit", function()
    local W = 1e-3
    local tr = ls.transition{H0 = H0, V = ls.matrix{{0, W / 2}, {W / 2, 0}}, from = 1, t0 = 0, t1 = T,
                             pulse = ls.pulse.square{amplitude = 1, start = 0, stop = T}, steps = 400}
    -- METHODS.md section 6: |a1|^2 = |V|^2 sin^2(w t/2)/(w/2)^2
    near(tr:probability(2, 1), (W / 2) ^ 2 * math.sin(D * T / 2) ^ 2 / (D / 2) ^ 2, 1e-14, "P1 formula")
    near(tr:probability(2, 1), rabi(W, D, T), 1e-11, "P1 vs Rabi, O(W^4)") -- Rabi (1937), small W
    near(tr:exact():probability(2), rabi(W, D, T), 1e-13, "P exact small W")
  end)
  it("RK4 and Magnus-4 agree with the Rabi formula, fixed steps and to a tolerance", function()
    local W = 0.8
    local tr = ls.transition{H0 = H0, V = ls.matrix{{0, W / 2}, {W / 2, 0}}, from = 1, t0 = 0, t1 = T,
                             pulse = ls.pulse.square{amplitude = 1, start = 0, stop = T}, steps = 400}
    local want = rabi(W, D, T) -- Rabi (1937)
    local rk = tr:exact{method = "rk4", tol = 1e-11}
    near(rk:probability(2), want, 1e-10, "RK4 to tol 1e-11")
    assert(rk:error(2) <= 1e-11 and rk:steps() > 16)
    -- a constant H makes one Magnus step exact (Blanes et al., Phys. Rep. 470, 151 (2009))
    near(tr:exact{method = "magnus4", steps = 8}:probability(2), want, 1e-13, "Magnus-4, constant H")
    -- RK4 with few steps is off by O(h^4) and says so through its error estimate
    local coarse = tr:exact{method = "rk4", steps = 16}
    local off = math.abs(coarse:probability(2) - want)
    assert(off > 1e-6 and coarse:error(2) > 1e-6 and coarse:warnings():find("error estimate", 1, true),
           "coarse RK4 " .. off .. " " .. coarse:error(2))
  end)
  it("takes the pulse as a Lua function of t", function()
    local W = 0.05
    local tr = ls.transition{H0 = H0, V = ls.matrix{{0, W / 2}, {W / 2, 0}}, from = 1, t0 = 0, t1 = T,
                             pulse = function(t) return 1.0 end, steps = 400}
    near(tr:exact():probability(2), rabi(W, D, T), 1e-8, "P exact, Lua pulse") -- Rabi (1937)
    near(tr:probability(2, 1), (W / 2) ^ 2 * math.sin(D * T / 2) ^ 2 / (D / 2) ^ 2, 1e-12, "P1, Lua pulse")
  end)
end)

describe("transition: Landau-Zener", function()
  -- H = [[a t/2, g], [g, -a t/2]]; Zener, Proc. R. Soc. A 137, 696 (1932):
  -- P(stay diabatic) = exp(-2 pi g^2 / a), measured with adiabatic states at -T and +T.
  local a, g, T = 1.0, 0.25, 40
  local want = math.exp(-2 * math.pi * g * g / a)
  local function Hof(t) return ls.matrix{{a * t / 2, g}, {g, -a * t / 2}} end
  -- <up(+T)| U |low(-T)> from propagator columns given in the original basis
  local function lz_prob(Ucol)
    local _, Zm = ls.eigen(Hof(-T))
    local _, Zp = ls.eigen(Hof(T))
    local acc = { 0, 0 }
    for f = 1, 2 do
      for i = 1, 2 do
        local up = { Zp:get(f, 2) }
        local low = { Zm:get(i, 1) }
        acc = cadd(acc, cmul(cmul(cconj(up), Ucol[i][f]), low))
      end
    end
    return acc[1] ^ 2 + acc[2] ^ 2
  end
  it("with H0 = 0 and V(t) a Lua function returning an op", function()
    local H0 = ls.matrix{{0, 0}, {0, 0}}
    local U = {}
    for i = 1, 2 do
      local ex = ls.transition{H0 = H0, V = Hof, from = i, t0 = -T, t1 = T, steps = 16000}:exact()
      U[i] = { { ex:amplitude(1) }, { ex:amplitude(2) } }
    end
    near(lz_prob(U), want, 3e-3, "LZ, V function") -- Zener (1932)
  end)
  it("with a linear ramp pulse", function()
    local H0 = ls.matrix{{0, g}, {g, 0}}
    local V = ls.matrix{{0.5, 0}, {0, -0.5}}
    local ramp = ls.pulse.ramp{from = -a * T, to = a * T, start = -T, stop = T}
    local E, Z = ls.eigen(H0)
    local U = {}
    for i = 1, 2 do
      local ex = ls.transition{H0 = H0, V = V, pulse = ramp, from = i, t0 = -T, t1 = T, steps = 16000}:exact()
      -- Schroedinger amplitudes in the eigenbasis of H0, then back to the original basis
      local psi = {}
      for f = 1, 2 do
        psi[f] = cmul(cmul(cexpi(-E[f] * T), { ex:amplitude(f) }), cexpi(E[i] * -T))
      end
      U[i] = {}
      for r = 1, 2 do
        local acc = { 0, 0 }
        for f = 1, 2 do acc = cadd(acc, cmul({ Z:get(r, f) }, psi[f])) end
        U[i][r] = acc
      end
    end
    -- columns U[i] are images of H0 eigenstates; rotate to the original basis on the input side
    local Uorig = {}
    for j = 1, 2 do
      Uorig[j] = {}
      for r = 1, 2 do
        local acc = { 0, 0 }
        for i = 1, 2 do acc = cadd(acc, cmul(U[i][r], cconj({ Z:get(j, i) }))) end
        Uorig[j][r] = acc
      end
    end
    near(lz_prob(Uorig), want, 3e-3, "LZ, ramp") -- Zener (1932)
  end)
end)

describe("transition: errors", function()
  local H0 = ls.matrix{{0, 0}, {0, 1}}
  local V = ls.matrix{{0, 1}, {1, 0}}
  local p = ls.pulse.gaussian{amplitude = 0.1, center = 0, width = 1}
  local function mk(over)
    local a = {H0 = H0, V = V, pulse = p, from = 1, t0 = -5, t1 = 5}
    for k, v in pairs(over) do a[k] = v end
    return function() return ls.transition(a) end
  end
  it("rejects bad arguments", function()
    raises(mk{from = 3}, "out of range 1..2")
    raises(mk{from = 0}, "out of range 1..2")
    raises(mk{from = 1.5}, "'from' must be an integer")
    raises(mk{t1 = -5}, "must exceed t0")
    raises(mk{t1 = -7}, "must exceed t0")
    raises(mk{pulse = function(t) return 0 / 0 end}, "NaN")
    raises(mk{pulse = function(t) return "x" end}, "number expected")
    raises(mk{pulse = function(t) error("boom") end}, "boom")
    raises(mk{H0 = "H"}, "'H0' must be an op")
    raises(mk{pulse = "gauss"}, "'pulse' must be a pulse")
    raises(mk{V = 3}, "'V' must be an op")
    raises(mk{V = ls.matrix{{0, 1, 0}, {1, 0, 0}, {0, 0, 0}}}, "V is 3x3 but H0 is 2x2")
    raises(mk{V = ls.matrix{{0, 1}, {2, 0}}}, "not Hermitian")
    raises(function()
      ls.transition{H0 = H0, V = function(t) return ls.matrix{{0, 1}, {2, 0}} end, from = 1, t0 = 0, t1 = 1}
    end, "not Hermitian")
    raises(function()
      ls.transition{H0 = H0, V = function(t) return ls.matrix{{0, 0 / 0}, {0, 0}} end, from = 1, t0 = 0, t1 = 1}
    end, "NaN")
    raises(mk{order = 3}, "order must be 1 or 2")
    raises(mk{t0 = "a"}, "'t0' must be a number")
    raises(mk{pulse = ls.pulse.ramp{start = 0, stop = 1}, t1 = math.huge}, "infinite t0 or t1")
    raises(mk{colour = 1}, "unknown option")
    raises(mk{pulse = ls.pulse.sine{amplitude = 1e300, omega = 1,
                                    envelope = ls.pulse.sine{amplitude = 1e300, omega = 2, envelope = p}}}, "overflows")
    raises(mk{pulse = ls.pulse.gaussian{width = 1e-200}}, "too short to integrate")
    raises(mk{steps = 4}, "steps must be from 8 to 1e8")
    local tr = mk{}()
    raises(function() tr:probability(5) end, "out of range")
    raises(function() tr:amplitude(1, 2) end, "order must be from 0 to 1")
  end)
  it("names the level when from is out of range, and t0/t1 in order", function()
    -- issue 6: from out of range, t1 before t0
    raises(mk{from = 3}, "bad argument #1 to 'transition' (from = 3 is out of range 1..2)")
    raises(mk{from = -1}, "from = -1 is out of range 1..2")
    raises(mk{t0 = 2, t1 = 1}, "transition: t1 (1) must exceed t0 (2)")
    raises(mk{t0 = 1, t1 = 1}, "transition: t1 (1) must exceed t0 (1)")
    raises(mk{t0 = 0 / 0}, "t0 and t1 must be numbers")
    raises(mk{t0 = math.huge, t1 = math.huge}, "must exceed t0")
  end)
  it("stops at a pulse that returns NaN or raises, in first order and in exact", function()
    -- issue 6: a pulse that returns NaN; a Lua pulse function that raises
    raises(mk{pulse = function(t) return t > 1 and 0 / 0 or 0.1 end}, "transition: the pulse function returned NaN at t = ")
    raises(mk{pulse = function(t) if t > 1 then error("pulse broke") end return 0.1 end}, "pulse broke")
    raises(mk{pulse = function(t) return t > 1 and math.huge or 0.1 end}, "NaN or infinite")
    -- the same function turning bad after the perturbative pass: exact() names itself
    local bad = false
    local tr = mk{pulse = function(t) if bad then return 0 / 0 end return 0.1 end}()
    bad = true
    raises(function() tr:exact() end, "exact: the pulse function returned NaN at t = ")
    bad = false
    local tr2 = mk{pulse = function(t) if bad then error("late failure") end return 0.1 end}()
    bad = true
    raises(function() tr2:exact() end, "exact: the pulse function failed at t = ")
    raises(function() tr2:exact() end, "late failure")
    -- a V function that raises
    raises(function()
      ls.transition{H0 = H0, V = function(t) error("no field") end, from = 1, t0 = 0, t1 = 1}
    end, "no field")
  end)
  it("checks the options of exact", function()
    local tr = mk{}()
    raises(function() tr:exact{tol = -1} end, "field 'tol' must be a positive number")
    raises(function() tr:exact{tol = 0 / 0} end, "field 'tol' must be a positive number")
    raises(function() tr:exact{method = "euler"} end, "field 'method' must be 'auto', 'rk4' or 'magnus4'")
    raises(function() tr:exact{steps = -3} end, "steps must be from 8")
    raises(function() tr:exact{max_steps = 2} end, "max_steps must be from 16")
    raises(function() tr:exact{stpes = 10} end, "unknown option")
    raises(function() tr:exact(3) end, "steps must be from 8")
    raises(function() tr:exact("x") end, "number expected")
    local fld = ls.transition{H0 = H0, V = function(t) return 0.1 * V end, from = 1, t0 = 0, t1 = 1, steps = 64}
    raises(function() fld:exact{method = "rk4"} end, "method rk4 needs V with a pulse")
    raises(function() tr:exact():exact() end, "already an exact result")
    -- no convergence is an expected numerical failure: nil, message, code
    local ex, msg, code = tr:exact{tol = 1e-15, max_steps = 64}
    assert(ex == nil and msg:find("no convergence to tol 1e-15 within 64 steps", 1, true) and code == 5, tostring(msg))
  end)
end)

describe("transition: fast carriers under an envelope (default options)", function()
  -- Two levels 0 and w0 coupled by g, V(t) = g env(t) sin(w t + phi). Writing
  -- sin x = (e^{ix} - e^{-ix})/2i (Euler), first order (Dirac; Sakurai, Modern
  -- Quantum Mechanics, Sec. 5.6, Eq. for c^(1)) gives
  --   a = -i g (1/2i) [e^{i phi} G(w0 + w) - e^{-i phi} G(w0 - w)],  G(k) = int env(t) e^{ikt} dt.
  -- For env = exp(-(t - c)^2/(2 s^2)), G(k) = e^{ikc} s sqrt(2 pi) e^{-k^2 s^2/2}
  -- (Fourier transform of a Gaussian, Abramowitz & Stegun 7.4.6).
  local function gauss_ft(k, c, s)
    local m = s * math.sqrt(2 * math.pi) * math.exp(-k * k * s * s / 2)
    return { m * math.cos(k * c), m * math.sin(k * c) }
  end
  local function first_order(g, phi, Gp, Gm)
    -- -i g (1/2i) [...] = -(g/2) [e^{i phi} Gp - e^{-i phi} Gm]
    local t = cadd(cmul(cexpi(phi), Gp), cmul(cexpi(-phi), { -Gm[1], -Gm[2] }))
    return { -g / 2 * t[1], -g / 2 * t[2] }
  end
  local w0, g = 250.0, 1e-3
  local H0 = ls.matrix{{0, 0}, {0, w0}}
  local V = ls.matrix{{0, g}, {g, 0}}

  it("Gaussian envelope, w s = 1000, on and off resonance: the closed form to 1e-6", function()
    local s = 4.0
    for _, case in ipairs{ { c = 0, det = 0, phi = math.pi / 2 }, { c = 3.7, det = 1.3 / s, phi = 0.4 } } do
      local w = w0 - case.det
      local pulse = ls.pulse.sine{amplitude = 1, omega = w, phase = case.phi,
                                  envelope = ls.pulse.gaussian{amplitude = 1, center = case.c, width = s}}
      local tr = ls.transition{H0 = H0, V = V, pulse = pulse, from = 1, t0 = -math.huge, t1 = math.huge}
      local want = first_order(g, case.phi, gauss_ft(w0 + w, case.c, s), gauss_ft(w0 - w, case.c, s))
      local re, im = tr:amplitude(2)
      local mag = math.sqrt(want[1] ^ 2 + want[2] ^ 2)
      near(re, want[1], 1e-6 * mag, "Re a, c = " .. case.c)
      near(im, want[2], 1e-6 * mag, "Im a, c = " .. case.c)
      near(tr:probability(2), mag * mag, 1e-6 * mag * mag, "P")
      assert(tr:error(2) < 1e-6 * mag and tr:warnings() == "", tr:warnings())
    end
  end)

  it("a sum of two carriers drives two levels term by term", function()
    -- three levels 0, 170, 310; each carrier resonant with one level, the
    -- other term at least 140 * 6 widths off (its share is e^{-(140*6)^2/2} = 0)
    local H3 = ls.matrix{{0, 0, 0}, {0, 170, 0}, {0, 0, 310}}
    local V3 = ls.matrix{{0, 2e-3, 5e-4}, {2e-3, 0, 0}, {5e-4, 0, 0}}
    local p = ls.pulse.sine{omega = 170, envelope = ls.pulse.gaussian{width = 6}}
            + ls.pulse.sine{omega = 310, phase = 1.1, envelope = ls.pulse.gaussian{center = 2, width = 9}}
    local tr = ls.transition{H0 = H3, V = V3, pulse = p, from = 1, t0 = -math.huge, t1 = math.huge}
    local a2 = first_order(2e-3, 0, gauss_ft(340, 0, 6), gauss_ft(0, 0, 6))
    local a3 = first_order(5e-4, 1.1, gauss_ft(620, 2, 9), gauss_ft(0, 2, 9))
    local re, im = tr:amplitude(2)
    near(re, a2[1], 1e-6 * math.abs(a2[1]) + 1e-12, "Re a(1->2)"); near(im, a2[2], 1e-6 * math.abs(a2[1]), "Im a(1->2)")
    re, im = tr:amplitude(3)
    local m3 = math.sqrt(a3[1] ^ 2 + a3[2] ^ 2)
    near(re, a3[1], 1e-6 * m3, "Re a(1->3)"); near(im, a3[2], 1e-6 * m3, "Im a(1->3)")
  end)

  it("a linear ramp envelope under a fast carrier, piece by piece", function()
    -- env = t/L on [0, L], 1 after; window [0, T]. G(k) = int_0^L (t/L) e^{ikt} dt + int_L^T e^{ikt} dt
    -- = [e^{ikL}(L/(ik) + 1/k^2) - 1/k^2]/L + (e^{ikT} - e^{ikL})/(ik)   (integration by parts, common practice)
    local L, T = 7.0, 20.0
    local function G(k)
      if k == 0 then return { L / 2 + (T - L), 0 } end
      local eL, eT = cexpi(k * L), cexpi(k * T)
      local ik_inv = { 0, -1 / k } -- 1/(ik)
      local r = cadd(cmul(eL, cadd(cmul({ L, 0 }, ik_inv), { 1 / (k * k), 0 })), { -1 / (k * k), 0 })
      r = { r[1] / L, r[2] / L }
      return cadd(r, cmul(cadd(eT, { -eL[1], -eL[2] }), ik_inv))
    end
    local pulse = ls.pulse.sine{omega = w0, envelope = ls.pulse.ramp{from = 0, to = 1, start = 0, stop = L}}
    local tr = ls.transition{H0 = H0, V = V, pulse = pulse, from = 1, t0 = 0, t1 = T}
    local want = first_order(g, 0, G(2 * w0), G(0))
    local re, im = tr:amplitude(2)
    local mag = math.sqrt(want[1] ^ 2 + want[2] ^ 2)
    near(re, want[1], 1e-8 * mag, "Re a"); near(im, want[2], 1e-8 * mag, "Im a")
  end)

  it("a Lua function with a fast carrier is refined until first order converges", function()
    -- same closed form (c = 0, phi = pi/2: a cosine carrier); the window cut
    -- at +-10 s changes G by erfc(10/sqrt2) ~ 1.5e-23 relative
    local s = 4.0
    local f = function(t) return math.exp(-t * t / (2 * s * s)) * math.cos(w0 * t) end
    local want = first_order(g, math.pi / 2, gauss_ft(2 * w0, 0, s), gauss_ft(0, 0, s))
    local P = want[1] ^ 2 + want[2] ^ 2
    local tr = ls.transition{H0 = H0, V = V, pulse = f, from = 1, t0 = -10 * s, t1 = 10 * s}
    near(tr:probability(2), P, 1e-6 * P, "P, refined Lua pulse")
    assert(tr:steps() > 4000 and tr:warnings() == "", tr:steps() .. " " .. tr:warnings())
    -- an explicit steps= is honoured, with a warning when halving changes the result
    local coarse = ls.transition{H0 = H0, V = V, pulse = f, from = 1, t0 = -10 * s, t1 = 10 * s, steps = 4000}
    assert(coarse:steps() == 4000)
    assert(coarse:warnings():find("first-order error estimate", 1, true), coarse:warnings())
    -- and so is a built-in envelope far narrower than the explicit grid
    local narrow = ls.transition{H0 = H0, V = V, from = 1, t0 = -10, t1 = 10, steps = 64,
                                 pulse = ls.pulse.gaussian{amplitude = 1, center = 0.1, width = 0.05}}
    assert(narrow:warnings():find("with steps = 64", 1, true), narrow:warnings())
  end)

  it("the disagreement warning names the level that matters most", function()
    -- invented three-level case: 1 -> 3 driven on resonance (first order 0.39, saturating),
    -- level 2 (near level 1) reached only through level 3 at second order (exact 0.028)
    local H = ls.matrix{{0, 0, 0}, {0, 0.05, 0}, {0, 0, 2.0}}
    local Vr = ls.matrix{{0, 0, 0.05}, {0, 0, 0.05}, {0.05, 0.05, 0}}
    local p = ls.pulse.sine{omega = 2.0, phase = math.pi / 2, envelope = ls.pulse.gaussian{width = 10}}
    local tr = ls.transition{H0 = H, V = Vr, pulse = p, from = 1, t0 = -math.huge, t1 = math.huge}
    local ex = tr:exact()
    assert(ex:probability(2) > 0.01 and tr:probability(2) == 0)
    local w = tr:warnings()
    assert(w:find("disagree (level 3:", 1, true) and not w:find("level 2:", 1, true), w)
    -- a second-order effect below 1% of the main probability is no disagreement (common practice)
    local Vw = ls.matrix{{0, 0, 0.01}, {0, 0, 0.002}, {0.01, 0.002, 0}}
    local weak = ls.transition{H0 = H, V = Vw, pulse = p, from = 1, t0 = -math.huge, t1 = math.huge}
    weak:exact()
    assert(weak:warnings() == "", weak:warnings())
  end)
end)
