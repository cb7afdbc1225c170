-- bench job "degenerate": 10-site open XX chain V = sum_i (Sx_i Sx_i+1 +
-- Sy_i Sy_i+1) on the Zeeman H0 = h sum_i Sz_i; the group of total Sz = 0
-- (252 degenerate states) treated to first and second order (same job as
-- peer.py degenerate). Prints one line; result = lowest first-order shift.
local L = (params and params.sites) or 10
local h = (params and params.h) or 1.0
-- load the Lua sugar modules before the clock starts, as the baseline imports
-- NumPy/SciPy before its timer
local _ = ls.perturb, ls.sweep
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local P = ls.product(ls.spin(0.5), L)
local H0 = h * ls.sum(1, L, function(i) return P:site(i).Sz end)
-- Sx Sx + Sy Sy = (S+ S- + S- S+) / 2
local V = ls.sum(1, L - 1, function(i)
  local a, b = P:site(i), P:site(i + 1)
  return 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp)
end)
-- levels with Sz_total = 0: after the 386 states with Sz_total < 0 (ascending H0)
local below = 0
for k = 0, L // 2 - 1 do
  local c = 1
  for j = 1, k do c = c * (L - j + 1) // j end
  below = below + c
end
local group = {}
local c = 1
for j = 1, L // 2 do c = c * (L - j + 1) // j end
for i = 1, c do group[i] = below + i end
local t1 = ls.clock()
local s = ls.perturb(H0, V, { order = 2, levels = group, states = false }) -- energies only, as the baseline
local t2 = ls.clock()
io.write(string.format("degenerate seconds=%.6f result=%.16g build=%.6f\n", t2 - t0, s:energy(group[1], 1), t1 - t0))
