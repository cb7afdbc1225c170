-- spins_and_modes.lua -- models built from parts: a spin centre from tensors
-- and two vibrational modes in Fermi resonance.
-- All parameters are invented: a spin-1 electron with zero-field splitting,
-- a tilted hyperfine tensor to a spin-1 nucleus with a quadrupole coupling,
-- a field of 10 mT at 30 degrees (MHz throughout), and two modes with
-- omega_1 ~ 2 omega_2 coupled by a cubic term (cm^-1).
local ls = require "levelshift"

-- 1. spin centre: zero field + hyperfine + quadrupole as H0, the Zeeman term as V
local m = ls.spin_model()
local e, n = m:add_spin(1, "e"), m:add_spin(1, "nucleus")
m:zero_field(e, { axial = 2100, rhombic = 12 })                                   -- invented
m:hyperfine(e, n, { principal = { -2.2, -2.2, -3.0 }, euler = { 0, 20, 0 } })     -- invented
m:quadrupole(n, { coupling = -4.0 })                                              -- invented
local muB = ls.units.convert(10, "mT", "MHz")
local th = math.rad(30)
m:zeeman(e, { principal = { 2.003, 2.003, 2.001 } }, { muB * math.sin(th), 0, muB * math.cos(th) })
local H0, V = m:split({ "zero_field", "hyperfine", "quadrupole" }, { "zeeman" })
local s = ls.perturb(H0, V, { order = 2 })
print(s)
local c = s:check(1)
print(string.format("largest |series - exact| at the full field: %.3g MHz", c.max_error))

-- 2. two modes in Fermi resonance: |1,0> and |0,2> taken together
local ff = ls.force_field { omegas = { 1300, 655 }, levels = 10, cubic = { { 1, 2, 2, -40 } } } -- invented (cm^-1)
local f = ls.perturb(ff.H0, ff.V3, { order = 4, levels = { 3, 4, 5 } })
print(f)
local E = ls.eigen(ff.H0 + ff.V3, { count = 5, vectors = false })
for k = 3, 5 do print(string.format("level %d: series %.6f, exact %.6f cm^-1", k, f:at(k, 1), E[k])) end
