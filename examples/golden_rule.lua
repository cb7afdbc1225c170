-- golden_rule.lua -- a level decaying into a band: Fermi's golden rule beside
-- the exact propagation of a discretised band (hbar = 1).
-- All parameters are invented (dimensionless): a bound level at E = 0 coupled
-- with v = 0.005 to a band of 240 levels from -2.4 to 2.4 (spacing 0.02), and
-- the same level driven by 2 F cos(w t) into a band sitting w = 3 above it.
local ls = require "levelshift"

local N, d, v = 240, 0.02, 0.005           -- invented
local band = {}
for k = 1, N do band[k] = (k - (N + 1) / 2) * d end

-- 1. The rate three ways: a number for rho, a function of E, the band itself
local r1 = ls.golden_rule{V = v, rho = 1 / d}
local r2 = ls.golden_rule{V = v, rho = function(E) return 1 / d end, E = 0}
local r3, info = ls.golden_rule{V = v, band = band, broadening = d, shape = "gaussian"}
print(string.format("golden rule: Gamma = %.6e (rho a number), %.6e (a function), %.6e (the band, rho = %.3f)",
                    r1, r2, r3, info.rho))

-- 2. Exact decay of the level into the discrete band, first order beside it
local B = ls.basis(N + 1)
local H0 = B:diag(function(s) return s.index == 1 and 0 or band[s.index - 1] end)
local V = B:matrix(function(a, b) return ((a.index == 1) ~= (b.index == 1)) and v or 0 end)
local from = N // 2 + 1 -- the level at E = 0 sits in the middle of the band
print("\n     t   P0 exact     exp(-Gamma t)   1 - sum of first-order P (fails once Gamma t ~ 1)")
for _, t in ipairs({ 25, 50, 100, 150 }) do
  local tr = ls.transition{ H0 = H0, V = V, from = from, t0 = 0, t1 = t,
                            pulse = ls.pulse.square{ amplitude = 1, start = 0, stop = t } }
  local lost = 0
  for f = 1, N + 1 do if f ~= from then lost = lost + tr:probability(f, 1) end end
  local ex = tr:exact{ tol = 1e-7 }
  print(string.format("%6g   %.6f     %.6f        %.6f", t, ex:probability(from), math.exp(-r3 * t), 1 - lost))
end
print(string.format("recurrence time 2 pi / spacing = %.0f; the exponential law holds well before it", 2 * math.pi / d))

-- 3. A harmonic drive 2 F cos(w t) into a band centred w above the level
local w, F = 3.0, v                          -- invented
local ra, ia = ls.golden_rule{ V = F, band = (function()
  local b = {}
  for k = 1, N do b[k] = w + band[k] end
  return b
end)(), broadening = d, shape = "gaussian", E = 0, omega = w, process = "absorption" }
local re, ie = ls.golden_rule{ V = F, rho = 0, E = 0, omega = w, process = "emission" }
print(string.format("\nharmonic drive: absorption Gamma = %.6e into E = %g; emission into E = %g: %g (no states there)",
                    ra, ia.energy, ie.energy, re))
if ia.warning then print("warning: " .. ia.warning) end
