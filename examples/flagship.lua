-- Flagship demo: an invented spin-1 defect used as a magnetic field sensor.
-- Every parameter below is INVENTED for this demo (a scenario of our own):
--   zero-field splitting D = 2.740 GHz, strain term E = 0.004 GHz,
--   electron g = 2.0031, a spin-1/2 nuclear partner with isotropic
--   hyperfine A = 0.0126 GHz, a 0.9 mT field tilted 25 degrees from the axis.
-- Energies in GHz (h = 1). H = D Sz^2 + E (Sx^2 - Sy^2) + gamma B.S + A S.I
local ls = ls or require "levelshift"

local p = {
  D = 2.740, E = 0.004, g = 2.0031, A = 0.0126,
  B = 0.9e-3, tilt = math.rad(25),
}
if params then for k, v in pairs(params) do p[k] = v end end
local muB_over_h = 13.996244936 -- GHz/T (CODATA 2018)

local P = ls.product(ls.spin(1), ls.spin(0.5))
local S, I = P:site(1), P:site(2)
local gammaB = p.g * muB_over_h * p.B
local Bx, Bz = gammaB * math.sin(p.tilt), gammaB * math.cos(p.tilt)

local H0 = p.D * S.Sz ^ 2 + p.E * (S.Sx ^ 2 - S.Sy ^ 2)
         + p.A * (S.Sx * I.Sx + S.Sy * I.Sy + S.Sz * I.Sz)
local Vfield = Bx * S.Sx + Bz * S.Sz
local H = H0 + Vfield

local E, U = ls.eigen(H)
print(string.format("invented spin-1 defect + nuclear spin 1/2, B = %.2f mT at %.0f deg", p.B * 1e3, math.deg(p.tilt)))
print(string.format("%5s  %14s  %14s  %s", "level", "E (GHz)", "E - E1 (MHz)", "largest component"))
for k = 1, #E do
  local best, bi = -1, 1
  for i = 1, P:dim() do
    local re, im = U:get(i, k)
    local w = re * re + im * im
    if w > best then best, bi = w, i end
  end
  print(string.format("%5d  %14.9f  %14.4f  %s (%.3f)", k, E[k], (E[k] - E[1]) * 1e3, P:describe(bi), best))
end
local E0 = ls.eigen(H0)
print(string.format("zero field: the m = +1/-1 manifold spans %.4f MHz; the field opens it to %.4f MHz",
  (E0[6] - E0[3]) * 1e3, (E[6] - E[3]) * 1e3))
