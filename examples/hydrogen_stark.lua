-- Hydrogen in a uniform field (Stark effect): perturbation series with the
-- continuum carried by Coulomb-Sturmian pseudostates, beside exact
-- diagonalization. Atomic units; F = 5e-4 a.u. (invented) is about 2.6e8 V/m.
local ls = require "levelshift"
local h = ls.recipe("hydrogen", { field = 5e-4 })
local F = h.params.field
local s = ls.perturb(h.H0, h.V, { order = 4, levels = { 1, 2, 3, 4, 5 } })
print(string.format("F = %g a.u. (an invented field strength); %d states (lmax %d, %d functions per l, kappa %g)", F, h.basis:dim(), h.params.lmax,
  h.params.nmax, h.params.kappa))
print(string.format("1s polarizability: %.10f a.u. (9/2 exactly)", -2 * s:energy(1, 2) / F ^ 2))
local E = ls.eigen(h.H0 + h.V, { count = 5, vectors = false })
-- |m| of a level from its zeroth-order state (inside the n = 2 group the
-- states are parabolic mixtures of 2s and 2p)
local function absm(lev)
  local psi, m2 = s:state(lev, 0), 0
  for k = 1, h.basis:dim() do m2 = m2 + (psi:get(k, 1)) ^ 2 * h.basis:labels(k).m ^ 2 end
  return math.floor(math.sqrt(m2) + 0.5)
end
print("level  n  |m|     E1/F      E2/F^2      E3/F^3      E4/F^4   series (order 4)    exact")
for lev = 1, 5 do
  print(string.format("%5d  %d  %3d %8.3f %11.4f %11.2f %11.1f   %.12f  %.12f", lev, h.basis:labels(lev).n, absm(lev),
    s:energy(lev, 1) / F, s:energy(lev, 2) / F ^ 2, s:energy(lev, 3) / F ^ 3, s:energy(lev, 4) / F ^ 4,
    s:at(lev, 1), E[lev]))
end
