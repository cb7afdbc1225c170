-- bench job "sweep": 400-point lambda sweep of the lowest 10 levels of
-- N_op + 1/2 + lambda x^4 on N = 300 oscillator states, lambda from 0 to 0.5,
-- tracked, written to CSV (same job as peer.py sweep). Prints one line.
local n = (params and params.n) or 300
local points = (params and params.points) or 400
local levels = (params and params.levels) or 10
local lam_max = (params and params.lam_max) or 0.5
local out = (params and params.out) or os.tmpname() .. ".csv"
-- load the Lua sugar modules before the clock starts, as the baseline imports
-- NumPy/SciPy before its timer
local _ = ls.perturb, ls.sweep
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local o = ls.oscillator(n)
local sw = ls.sweep{H0 = o.number + 0.5, V = o.x ^ 4, from = 0, to = lam_max, steps = points - 1,
                    count = levels, progress = false}
sw:write(out)
local t1 = ls.clock()
local E0 = sw:level(1)
if not (params and params.out) then os.remove(out) end
io.write(string.format("sweep seconds=%.6f result=%.13g\n", t1 - t0, E0[#E0]))
