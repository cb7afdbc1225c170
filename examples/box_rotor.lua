-- A box with a bump and a rotor in a field (invented parameters).
local ls = require "levelshift"

-- Box of width 2 (centered, x in [-1, 1]) with a Gaussian bump of height 0.8
-- and a weak tilt: V(x) = 0.8 exp(-x^2/0.05) + 0.3 x, by quadrature in C.
local B = ls.box(40, { width = 2, mass = 1, centered = true })
local V, err = B:potential(function(x) return 0.8 * math.exp(-x * x / 0.05) + 0.3 * x end)
print(string.format("quadrature error estimate %.1e", err))
local s = ls.perturb(B.H0, V, { order = 6, levels = { 1, 2, 3 } })
local E = ls.eigen(B.H0 + V, { count = 3 })
for n = 1, 3 do
  print(string.format("box n=%d  E0 %.6f  series(6) %.8f  exact %.8f", n, s:energy(n, 0), s:at(n, 1), E[n]))
end

-- Rotor with B = 0.37, mu E = 0.05: second-order Stark shifts of J = 1, 2 by |M|.
local R = ls.rotor(10)
local r = ls.perturb(0.37 * R.J2, -0.05 * R.cos, { order = 2, levels = { 2, 3, 4, 5, 6, 7, 8, 9 } })
for lev = 2, 9 do
  print(string.format("rotor level %d  E0 %.3f  E2 %+.6e", lev, r:energy(lev, 0), r:energy(lev, 2)))
end
print("CG <1 1, 1 -1 | 2 0> =", ls.clebsch(1, 1, 1, -1, 2, 0))
