-- transition_pulse.lua -- an oscillator kicked by a Gaussian force (hbar = 1).
-- Invented, dimensionless: omega = 1, force 0.2 exp(-t^2/2), V(t) = -f(t) x.
-- Exact: the kick leaves a coherent state, |alpha|^2 = |int f e^(it) dt|^2 / 2
-- = (0.2 sqrt(2 pi) e^(-1/2))^2 / 2 and P(n) = e^(-|alpha|^2) |alpha|^(2n) / n!
-- (common practice: the forced oscillator, e.g. any quantum-optics text).
local ls = require "levelshift"
local B = ls.oscillator(12)
local pulse = ls.pulse.gaussian{amplitude = 0.2, center = 0, width = 1}
local tr = ls.transition{H0 = B.number, V = -1 * B.x, pulse = pulse, from = 1,
                         t0 = -math.huge, t1 = math.huge, order = 2}
local ex = tr:exact()
local a2 = (0.2 * math.sqrt(2 * math.pi) * math.exp(-0.5)) ^ 2 / 2
print("invented Gaussian kick of an oscillator: amplitude 0.2, width 1, omega 1")
print("level   P(order 1)     P(order 2)     P(exact)      closed form   grid error")
for to = 2, 4 do
  local n = to - 1
  local closed = math.exp(-a2) * a2 ^ n
  for k = 2, n do closed = closed / k end
  print(string.format("%5d  %.6e  %.6e  %.6e  %.6e  %.1e", to, tr:probability(to, 1), tr:probability(to),
                      ex:probability(to), closed, tr:error(to)))
end
if tr:warnings() ~= "" then print("warning: " .. tr:warnings()) end
