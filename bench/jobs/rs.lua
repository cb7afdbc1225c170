-- bench job "rs": Rayleigh-Schroedinger series of the oscillator ground
-- level, diagonal H0 = N_op + 1/2, V = x^4 (sparse), order K (same job as
-- peer.py rs 2000 40). Prints one line; result = E^(4) = -30885/128.
local n = (params and params.n) or 2000
local K = (params and params.k) or 40
-- load the Lua sugar modules before the clock starts, as the baseline imports
-- NumPy/SciPy before its timer
local _ = ls.perturb, ls.sweep
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local o = ls.oscillator(n)
local H0 = o.number + 0.5
local V = o.x ^ 4
local t1 = ls.clock()
local s = ls.perturb(H0, V, { order = K, levels = { 1 } })
local t2 = ls.clock()
io.write(string.format("rs seconds=%.6f result=%.16g build=%.6f\n", t2 - t0, s:energy(1, 4), t1 - t0))
