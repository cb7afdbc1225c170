-- Two sites, two electrons (Hubbard dimer, S_z = 0): folding out the doubly
-- occupied states at large U leaves a spin-exchange Hamiltonian on the two
-- singly occupied states, J = 4 t^2 / U at second order.
-- Basis: |up,dn>, |dn,up>, |updn,0>, |0,updn>; hopping -t (one fermion order).
-- t = 1, U = 10 are invented (dimensionless).
local ls = ls or require "levelshift"
local t = (params and params.t) or 1.0
local U = (params and params.U) or 10.0
local H0 = ls.matrix{{0, 0, 0, 0}, {0, 0, 0, 0}, {0, 0, U, 0}, {0, 0, 0, U}}
local V = ls.matrix{{0, 0, -t, -t}, {0, 0, t, t}, {-t, t, 0, 0}, {-t, t, 0, 0}}
local h = ls.effective(H0, V, {levels = {1, 2}, order = 4})
print(string.format("Hubbard dimer, invented t = %g, U = %g", t, U))
print(h)
local J = 4 * t * t / U
local E2 = ls.eigen(h:at(1, 2), {vectors = false})
local E4 = ls.eigen(h:at(1), {vectors = false})
local exact = (U - math.sqrt(U * U + 16 * t * t)) / 2
print(string.format("order 2: singlet %.10f, triplet %.10f (-J = %.10f)", E2[1], E2[2], -J))
print(string.format("order 4: singlet %.10f; exact singlet %.10f", E4[1], exact))
