-- bench job "effective_big": effective Hamiltonian of the two lowest levels
-- of a qubit coupled to an oscillator, 2 x 50000 = 100,000 states,
-- H0 = omega a^+a + (Delta/2) sigma_z (diagonal), V = g sigma_x (a + a^+)
-- (sparse), order 6, by the sparse wave-operator path of ls.effective.
-- Invented parameters: omega = 1, Delta = 0.6, g = 0.05. Levels 1, 2 are
-- |dn,0> (E = -0.3) and |up,0> (E = 0.3). Prints one line; result = the
-- effective energy of level 1 at lambda = 1 through order 6, close to
-- -Delta/2 - g^2/(omega + Delta) = -0.3015625 at second order.
-- ../shared/bench/peer.py has no job of this name (yet).
local N = (params and params.n) or 50000
local K = (params and params.k) or 6
local omega, Delta, g = 1.0, 0.6, 0.05
-- load the Lua sugar modules and open LAPACK/BLAS before the clock, as the
-- other jobs do
local _ = ls.effective
ls.linalg()
local t0 = ls.clock()
local P = ls.product(ls.spin(0.5), ls.oscillator(N))
local q, o = P:site(1), P:site(2)
local H0 = omega * o.number + Delta * q.Sz -- (Delta/2) sigma_z = Delta Sz
local V = g * (2 * q.Sx) * (o.lower + o.raise)
local t1 = ls.clock()
local h = ls.effective(H0, V, { levels = { 1, 2 }, order = K })
local e1 = h:at(1):get(1, 1)
local t2 = ls.clock()
io.write(string.format("effective_big seconds=%.6f result=%.16g build=%.6f\n", t2 - t0, e1, t1 - t0))
