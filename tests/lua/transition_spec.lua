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
