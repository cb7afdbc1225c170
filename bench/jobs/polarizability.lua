-- bench job "polarizability": hydrogen 1s polarizability on a finite-
-- difference radial grid (same job as peer.py polarizability 48000, rmax 60):
-- H0 = H_{l=0} (+) H_{l=1}, V = z = r/sqrt(3) between the two channels,
-- alpha = -2 E(2) by one banded (Dalgarno-Lewis) solve. Prints one line.
local n = (params and params.n) or 48000
local rmax = (params and params.rmax) or 60
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local H0, r = ls.radial(n, { rmax = rmax, l = { 0, 1 } })
local z = r / math.sqrt(3) -- <Y10|cos(theta)|Y00> = 1/sqrt(3)
local V = ls.blocks{ { 0, z }, { z, 0 } }
local t1 = ls.clock()
local s = ls.perturb_solve(H0, V, { order = 2 })
local alpha = -2 * s:energy(2)
local t2 = ls.clock()
io.write(string.format("polarizability seconds=%.6f result=%.16g build=%.6f\n", t2 - t0, alpha, t1 - t0))
