-- light_shifts.lua -- dynamic polarizabilities, a magic frequency and a
-- driven level's ac Stark shift (atomic units, hbar = 1).
-- All parameters are invented: a ground level g and an excited level e of a
-- made-up atom, each coupled by a dipole to one upper level (g to u1 at
-- 0.12, e to u2 at 0.18 above e), and a trap laser of 1e9 W/cm^2.
local ls = require "levelshift"

local Eg, Ee, Eu1, Eu2 = 0, 0.07, 0.12, 0.25  -- invented (hartree)
local dg, de = 2.0, 3.1                      -- invented dipoles (e a0)
local H0 = ls.matrix { { Eg, 0, 0, 0 }, { 0, Ee, 0, 0 }, { 0, 0, Eu1, 0 }, { 0, 0, 0, Eu2 } }
local D = ls.matrix { { 0, 0, dg, 0 }, { 0, 0, 0, de }, { dg, 0, 0, 0 }, { 0, de, 0, 0 } }

-- 1. alpha(omega) of both levels below and between their resonances
print("omega      alpha_g      alpha_e")
for _, w in ipairs { 0, 0.04, 0.08, 0.11, 0.15 } do
  local ag, ig = ls.polarizability(H0, D, { level = 1, omega = w })
  local ae = ls.polarizability(H0, D, { level = 2, omega = w })
  print(string.format("%6.3f %12.4f %12.4f%s", w, ag, ae, ig.note and "   (g above its first resonance)" or ""))
end

-- 2. where both levels shift alike in the trap light (the transition g-e stays put)
local magic = ls.magic_frequencies(H0, D, { levels = { 1, 2 }, from = 0, to = 0.3, steps = 600 })
for _, w in ipairs(magic) do
  local a = ls.polarizability(H0, D, { level = 1, omega = w })
  print(string.format("magic frequency %.8f a.u.: alpha = %.4f a.u., light shift %.3f MHz at 1e9 W/cm^2", w, a,
    ls.light_shift(a, { intensity = 1e9, energy_unit = "MHz" })))
end

-- 3. the same ac Stark shift from the Floquet picture: H0 + F D cos(w t)
local w, F = 0.03, 1e-3                       -- invented drive (a.u.)
local Fl = ls.floquet { H0 = H0, V = D, omega = w, harmonics = 6 }
local s, idx = Fl:shift(1, 2)
local alpha = ls.polarizability(H0, D, { level = 1, omega = w })
print(string.format("ac Stark shift of g at omega = %.3f, F = %.0e: Floquet series %.6e, -alpha F^2/4 = %.6e", w, F,
  s:energy(idx, 2) * F ^ 2, -alpha * F ^ 2 / 4))
local G = ls.floquet { H0 = H0, V = F * D, omega = w, harmonics = 6 }
print(string.format("quasienergy of g: %.9e (exact in the extended space), converged to %.1e", G:quasienergies(1)[1].value,
  G:convergence(1)))
