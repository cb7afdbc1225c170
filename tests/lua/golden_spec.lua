-- golden_spec.lua -- ls.golden_rule (Fermi's golden rule, hbar = 1) and the
-- decay of a level into a discrete quasi-continuum by exact propagation.
local ls = require "levelshift"

local function near(a, b, tol, what)
  assert(math.abs(a - b) <= tol, string.format("%s: got %.12g, want %.12g (tol %.3g)", what or "value", a, b, tol))
end

local function raises(f, pattern)
  local ok, err = pcall(f)
  assert(not ok, "expected an error matching '" .. pattern .. "'")
  assert(tostring(err):find(pattern, 1, true), "error '" .. tostring(err) .. "' does not contain '" .. pattern .. "'")
end

describe("golden_rule: the formula", function()
  -- Dirac, Proc. R. Soc. A 114, 243 (1927); Fermi, Nuclear Physics (1950);
  -- Sakurai, Modern Quantum Mechanics, rev. ed. (1994), Sec. 5.6, "Fermi's golden
  -- rule" (eq. 5.6.34 from memory): w = (2 pi / hbar) |V_ni|^2 rho(E_n), E_n ~ E_i.
  it("constant perturbation, density of states a number", function()
    local V, rho = 0.0137, 42.5
    local rate, info = ls.golden_rule{V = V, rho = rho}
    near(rate, 2 * math.pi * V * V * rho, 1e-15, "2 pi |V|^2 rho")
    near(info.rho, rho, 0, "rho used")
    near(info.energy, 0, 0, "final energy = initial energy")
    assert(info.warning == nil)
    -- the sign of the matrix element does not matter, |V|^2
    near(ls.golden_rule{V = -V, rho = rho}, rate, 0, "|V|^2")
  end)
  it("harmonic perturbation: absorption at E + w, emission at E - w", function()
    -- Sakurai (1994) Sec. 5.6, harmonic perturbation V e^{iwt} + V^+ e^{-iwt}:
    -- absorption needs E_n = E_i + hbar w, stimulated emission E_n = E_i - hbar w
    local F, E, w = 0.021, 0.35, 1.7
    local rho = function(x) return 10 + 3 * x end -- an invented linear density of states
    local ra, ia = ls.golden_rule{V = F, rho = rho, E = E, omega = w, process = "absorption"}
    near(ia.energy, E + w, 1e-15, "absorption final energy")
    near(ra, 2 * math.pi * F * F * rho(E + w), 1e-15, "absorption rate")
    local re, ie = ls.golden_rule{V = F, rho = rho, E = E, omega = w, process = "emission"}
    near(ie.energy, E - w, 1e-15, "emission final energy")
    near(re, 2 * math.pi * F * F * rho(E - w), 1e-15, "emission rate")
    -- omega alone means absorption
    near(ls.golden_rule{V = F, rho = rho, E = E, omega = w}, ra, 0, "default process")
  end)
  it("a discretised band: Lorentzian comb reproduces 1/spacing", function()
    -- A comb of unit Lorentzians of half width g spaced d sums to
    -- (1/d) sinh(2 pi g/d) / (cosh(2 pi g/d) - cos(2 pi x/d)) (Poisson summation,
    -- common practice); at a level (x = 0) with g = d: (1/d) coth(pi) = (1/d)(1 + 0.0037).
    local d, N = 0.02, 4001
    local band = {}
    for k = 1, N do band[k] = (k - (N + 1) / 2) * d end
    local V = 0.006
    local rate, info = ls.golden_rule{V = V, band = band, broadening = d}
    -- the comb ends at +-X, X = (N/2) d: the missing Lorentzian tails take the
    -- fraction 1 - (2/pi) atan(X/g) away (common practice)
    local comb = (1 / d) / math.tanh(math.pi) * (2 / math.pi) * math.atan(N / 2 * d / d)
    near(info.rho, comb, 2e-5 * comb, "broadened density of states")
    near(rate, 2 * math.pi * V * V * info.rho, 1e-15, "rate from the broadened band")
    near(info.spacing, d, 1e-12, "mean spacing")
    -- Gaussian broadening (sigma = d) is flat to 1e-8: 1 + 2 exp(-2 pi^2) (Poisson summation)
    local _, ig = ls.golden_rule{V = V, band = band, broadening = d, shape = "gaussian"}
    near(ig.rho, (1 / d) * (1 + 2 * math.exp(-2 * math.pi ^ 2)), 1e-6 / d, "Gaussian comb")
    -- per-level couplings replace V: 2 pi sum |V_k|^2 L(E - E_k)
    local cpl = {}
    for k = 1, N do cpl[k] = V end
    near(ls.golden_rule{couplings = cpl, band = band, broadening = d}, rate, 1e-14, "couplings")
  end)
  it("warns outside its range", function()
    local band = {}
    for k = 1, 11 do band[k] = (k - 6) * 0.1 end
    local _, i1 = ls.golden_rule{V = 0.01, band = band, broadening = 0.01} -- broadening < spacing
    assert(i1.warning and i1.warning:find("below the mean level spacing", 1, true), tostring(i1.warning))
    local _, i2 = ls.golden_rule{V = 0.5, band = band, broadening = 0.1} -- rate ~ 16 >> width 1
    assert(i2.warning and i2.warning:find("not small against the band width", 1, true), tostring(i2.warning))
    local _, i3 = ls.golden_rule{V = 0.01, band = band, broadening = 0.1, E = 3}
    assert(i3.warning and i3.warning:find("outside the band", 1, true), tostring(i3.warning))
  end)
  it("rejects bad input, naming the field", function()
    raises(function() ls.golden_rule{V = 0.1} end, "give one of 'rho'")
    raises(function() ls.golden_rule{V = 0.1, rho = 1, band = {0}} end, "give one of 'rho'")
    raises(function() ls.golden_rule{rho = 1} end, "give the coupling 'V'")
    raises(function() ls.golden_rule{V = 0.1, rho = -1} end, "field 'rho' must be a finite number >= 0")
    raises(function() ls.golden_rule{V = 0.1, rho = 0 / 0} end, "field 'rho' must be a finite number >= 0")
    raises(function() ls.golden_rule{V = 0.1, rho = "x"} end, "field 'rho' must be a number or a function")
    raises(function() ls.golden_rule{V = 0.1, rho = function() return 0 / 0 end} end, "field 'rho' returned")
    raises(function() ls.golden_rule{V = 0.1, rho = function() return -2 end} end, "field 'rho' returned -2")
    raises(function() ls.golden_rule{V = 0.1, rho = function() error("no dos") end} end, "no dos")
    raises(function() ls.golden_rule{V = 0 / 0, rho = 1} end, "field 'V' must be finite")
    raises(function() ls.golden_rule{V = 0.1, rho = 1, omega = -1} end, "field 'omega' must be a finite number > 0")
    raises(function() ls.golden_rule{V = 0.1, rho = 1, process = "emission"} end, "field 'omega' is required")
    raises(function() ls.golden_rule{V = 0.1, rho = 1, process = "decay", omega = 1} end, "field 'process' must be")
    raises(function() ls.golden_rule{V = 0.1, rho = 1, process = "constant", omega = 1} end, "with process 'constant'")
    raises(function() ls.golden_rule{V = 0.1, band = {0, 1}} end, "field 'broadening' is required")
    raises(function() ls.golden_rule{V = 0.1, band = {0, 1}, broadening = 0} end, "field 'broadening' must be")
    raises(function() ls.golden_rule{V = 0.1, band = {}, broadening = 1} end, "field 'band' must hold 1 to 1e8")
    raises(function() ls.golden_rule{V = 0.1, band = {0, "a"}, broadening = 1} end, "entry 2 must be a number")
    raises(function() ls.golden_rule{V = 0.1, band = {0, 1 / 0}, broadening = 1} end, "entry 2 is not finite")
    raises(function() ls.golden_rule{V = 0.1, band = {0, 1}, broadening = 1, shape = "box"} end, "field 'shape'")
    raises(function() ls.golden_rule{couplings = {1}, band = {0, 1}, broadening = 1} end, "has 1 entries but 'band' has 2")
    raises(function() ls.golden_rule{couplings = {1}, rho = 1} end, "field 'couplings' needs a 'band'")
    raises(function() ls.golden_rule{V = 0.1, rho = 1, colour = 2} end, "unknown option")
    raises(function() ls.golden_rule(3) end, "table expected")
  end)
end)

describe("golden_rule against exact propagation of a quasi-continuum", function()
  -- A level |0> coupled with the same v to N equally spaced levels (spacing d)
  -- decays as exp(-Gamma t), Gamma = 2 pi v^2 / d, for 1/W << t < 2 pi / d:
  -- Bixon & Jortner, J. Chem. Phys. 48, 715 (1968); the Wigner-Weisskopf law,
  -- Z. Phys. 63, 54 (1930). With N = 200, d = 0.02, v = 0.006 and |0> midway
  -- between two band levels (Gamma t up to 2.3, Gamma/W = 0.003) the survival
  -- probability of this finite band stays within 0.3% of the exponential on
  -- t = 50..250 (checked separately by diagonalizing the same matrix); the
  -- tolerance is 1%.
  local N, d, v = 200, 0.02, 0.006
  local band = {}
  for k = 1, N do band[k] = (k - (N + 1) / 2) * d end
  local function model(center)
    local B = ls.basis(N + 1)
    local H0 = B:diag(function(s) return s.index == 1 and 0 or center + band[s.index - 1] end)
    local V = B:matrix(function(a, b)
      if (a.index == 1) ~= (b.index == 1) then return v end
      return 0
    end)
    return H0, V
  end
  it("constant coupling: P0(t) = exp(-Gamma t) with the golden-rule Gamma", function()
    -- Gaussian broadening sigma = d makes the comb flat to 1e-8 (Poisson
    -- summation, common practice); the band edges are 100 sigma away
    local rate = ls.golden_rule{V = v, band = band, broadening = d, shape = "gaussian"}
    near(rate, 2 * math.pi * v * v / d, 1e-6 * rate, "band rate vs 2 pi v^2 / d")
    local H0, V = model(0)
    local P = {}
    for _, t in ipairs({50, 200}) do
      -- |0> is level 101 by ascending energy (100 band levels lie below it)
      local tr = ls.transition{H0 = H0, V = V, from = 101, t0 = 0, t1 = t,
                               pulse = ls.pulse.square{amplitude = 1, start = 0, stop = t}}
      assert(tr:energies()[101] == 0)
      local ex = tr:exact{tol = 1e-7}
      P[t] = ex:probability(101)
      near(P[t], math.exp(-rate * t), 0.01 * math.exp(-rate * t), "P0(" .. t .. ") vs exp(-Gamma t)")
    end
    local fitted = math.log(P[50] / P[200]) / 150
    near(fitted, 2 * math.pi * v * v / d, 0.01 * fitted, "decay rate from two times")
  end)
  it("harmonic coupling 2 F cos(w t): absorption into a band at E + w", function()
    -- V(t) = F e^{-iwt} + F e^{iwt} with F = v; the band sits at w = 3 above |0>
    -- (counter-rotating terms are off resonance by 2w and change P0 by O((v/w)^2))
    local w = 3.0
    local rate = ls.golden_rule{V = v, rho = 1 / d, E = 0, omega = w, process = "absorption"}
    near(rate, 2 * math.pi * v * v / d, 1e-15, "absorption rate")
    local H0, V = model(w)
    local t = 150
    local tr = ls.transition{H0 = H0, V = V, from = 1, t0 = 0, t1 = t,
                             pulse = ls.pulse.sine{amplitude = 2, omega = w, phase = math.pi / 2}}
    local ex = tr:exact{tol = 1e-7}
    near(ex:probability(1), math.exp(-rate * t), 0.01 * math.exp(-rate * t), "P0 under the harmonic drive")
    -- the discretised band at w gives the same absorption rate, and emission
    -- into it (final energy -w, far below the band) nothing
    local shifted = {}
    for k = 1, N do shifted[k] = w + band[k] end
    local rb = ls.golden_rule{V = v, band = shifted, broadening = d, shape = "gaussian", E = 0, omega = w}
    near(rb, rate, 1e-6 * rate, "absorption rate from the band")
    local re, ie = ls.golden_rule{V = v, band = shifted, broadening = d, shape = "gaussian", E = 0, omega = w,
                                  process = "emission"}
    assert(ie.energy == -w and re < 1e-3 * rate and ie.warning:find("outside the band", 1, true))
  end)
  it("harmonic coupling: stimulated emission into a band at E - w", function()
    -- the same drive with the band w below |0>: Gamma = 2 pi |F|^2 rho(E - w)
    -- (Sakurai (1994) Sec. 5.6, emission term); |0> is now the highest level
    local w = 3.0
    local rate, info = ls.golden_rule{V = v, rho = 1 / d, E = 0, omega = w, process = "emission"}
    assert(info.energy == -w)
    local H0, V = model(-w)
    local t = 150
    local tr = ls.transition{H0 = H0, V = V, from = N + 1, t0 = 0, t1 = t,
                             pulse = ls.pulse.sine{amplitude = 2, omega = w, phase = math.pi / 2}}
    assert(tr:energies()[N + 1] == 0)
    local ex = tr:exact{tol = 1e-7}
    near(ex:probability(N + 1), math.exp(-rate * t), 0.01 * math.exp(-rate * t), "P0 under emission")
  end)
end)

describe("hostile fields (golden_rule, transition, exact)", function()
  it("never crash and always raise string errors", function()
    -- common practice for a C binding: random field values, each call succeeds or raises a string
    local vals = { 0, -1, 2.5, 0 / 0, math.huge, -math.huge, "x", {}, { 0, 0.1 }, { "a" }, true,
      function() error("boom") end, function() return 0 / 0 end, function() return 1 end,
      function() return ls.matrix{ { 0, 1 }, { 1, 0 } } end, ls.matrix{ { 0, 1 }, { 1, 0 } },
      ls.matrix{ { 0, 0 }, { 0, 1 } }, ls.pulse.gaussian{ width = 1 }, 1e300, 2 ^ 62, "rk4", "gaussian" }
    local gkeys = { "V", "rho", "band", "E", "omega", "process", "broadening", "shape", "couplings" }
    local tkeys = { "H0", "V", "pulse", "from", "t0", "t1", "order", "steps" }
    local ekeys = { "steps", "tol", "method", "max_steps" }
    local good = ls.transition{ H0 = ls.matrix{ { 0, 0 }, { 0, 1 } }, V = ls.matrix{ { 0, 1 }, { 1, 0 } },
                                pulse = ls.pulse.gaussian{ amplitude = 0.1, width = 1 }, from = 1, t0 = -3, t1 = 3, steps = 64 }
    math.randomseed(6)
    local bad = {}
    local function pick() return vals[math.random(#vals + 1)] end -- nil sometimes
    for _ = 1, 400 do
      local g = {}
      for _, k in ipairs(gkeys) do if math.random() < 0.5 then g[k] = pick() end end
      local ok, e = pcall(ls.golden_rule, g)
      if not ok and type(e) ~= "string" then bad[#bad + 1] = "golden_rule" end
      local t = { H0 = ls.matrix{ { 0, 0 }, { 0, 1 } }, from = 1, t0 = 0, t1 = 1, steps = 16 }
      for _, k in ipairs(tkeys) do if math.random() < 0.3 then t[k] = pick() end end
      if type(t.steps) == "number" and t.steps > 4096 then t.steps = 16 end -- keep the run short
      ok, e = pcall(ls.transition, t)
      if not ok and type(e) ~= "string" then bad[#bad + 1] = "transition" end
      local o = {}
      for _, k in ipairs(ekeys) do if math.random() < 0.5 then o[k] = pick() end end
      if type(o.steps) == "number" and o.steps > 4096 then o.steps = 64 end
      if type(o.max_steps) == "number" and o.max_steps > 4096 then o.max_steps = 4096 end
      ok, e = pcall(good.exact, good, o)
      if not ok and type(e) ~= "string" then bad[#bad + 1] = "exact" end
      for _, m in ipairs({ "amplitude", "probability", "error" }) do
        ok, e = pcall(good[m], good, pick(), pick())
        if not ok and type(e) ~= "string" then bad[#bad + 1] = m end
      end
    end
    assert.are.same({}, bad)
  end)
end)
