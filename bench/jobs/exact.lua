-- bench job "exact": all eigenpairs of the dense quartic oscillator
-- N_op + 1/2 + g x^4 (same job as peer.py exact). Prints one line.
local n = (params and params.n) or 1000
local g = (params and params.g) or 0.1
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local o = ls.oscillator(n)
local H = o.number + 0.5 + g * o.x ^ 4
local t1 = ls.clock()
local E = ls.eigen(H)
local t2 = ls.clock()
io.write(string.format("exact seconds=%.6f result=%.16g build=%.6f\n", t2 - t0, E[1], t1 - t0))
