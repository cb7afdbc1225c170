-- bench job "transition" (same job as peer.py transition): H = N_op + 1/2 +
-- f(t) x on the lowest M + 1 oscillator levels, f(t) = f0 exp(-((t - T/2)/tau)^2)
-- on [0, T], from level 0. First-order amplitudes to all M final levels from
-- 20001 time samples, then the exact propagation of the full H(t) to a
-- tolerance (the baseline runs DOP853 at rtol 1e-10, atol 1e-12; here RK4 in
-- the interaction picture, step doubling until the Richardson estimate of
-- every amplitude is below tol). Prints one line; result = first-order P(0->1).
local m = (params and params.m) or 200
local nt = (params and params.nt) or 20001
local T = (params and params.T) or 20.0
local tau = (params and params.tau) or 2.0
local f0 = (params and params.f0) or 0.1
local tol = (params and params.tol) or 1e-10
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local o = ls.oscillator(m + 1)
local tr = ls.transition{H0 = o.number + 0.5, V = o.x, from = 1, t0 = 0, t1 = T, steps = nt - 1,
                         pulse = ls.pulse.gaussian{amplitude = f0, center = T / 2, width = tau / math.sqrt(2)}}
local p1 = tr:probability(2, 1)
local t1 = ls.clock()
local ex = tr:exact{tol = tol}
local t2 = ls.clock()
io.write(string.format("transition seconds=%.6f result=%.16g exact=%.16g first=%.6f exact_s=%.6f exact_steps=%d\n",
                       t2 - t0, p1, ex:probability(2), t1 - t0, t2 - t1, ex:steps()))
