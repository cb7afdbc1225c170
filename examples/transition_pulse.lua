-- transition_pulse.lua -- an oscillator kicked by a Gaussian force (hbar = 1).
local ls = require "levelshift"
local B = ls.oscillator(12)
local pulse = ls.pulse.gaussian{amplitude = 0.2, center = 0, width = 1}
local tr = ls.transition{H0 = B.number, V = -1 * B.x, pulse = pulse, from = 1,
                         t0 = -math.huge, t1 = math.huge, order = 2}
local ex = tr:exact()
print("level   P(order 1)     P(order 2)     P(exact)      error(1+2)")
for to = 2, 4 do
  print(string.format("%5d  %.6e  %.6e  %.6e  %.1e", to, tr:probability(to, 1), tr:probability(to),
                      ex:probability(to), tr:error(to)))
end
if tr:warnings() ~= "" then print("warning: " .. tr:warnings()) end
