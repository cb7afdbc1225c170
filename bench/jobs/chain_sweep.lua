-- bench job "chain_sweep" (issue 15): 200-point sweep of the lowest 4 levels
-- of H(p) = H0 + p V on the open Heisenberg chain of L = 14 spins 1/2,
--   H0 = sum_{i=1}^{L-1} S_i . S_{i+1},  V = sum_{i=1}^{L} Sx_i,  p = 0 .. 1,
-- on the full 2^L product basis, levels followed by overlap (same job as
-- bench/peer_sparse.py chain_sweep 14 200: one eigsh per point, started from
-- the previous point's ground vector, levels sorted, not followed).
-- Prints one line; result = the lowest level at p = 1, e4 = the 4th there
-- (levels sorted at the last point, so following does not change them).
local L = (params and params.sites) or 14
local points = (params and params.points) or 200
local count = (params and params.count) or 4
-- load the Lua sugar modules before the clock starts, as the baseline imports
-- NumPy/SciPy before its timer
local _ = ls.perturb, ls.sweep
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local P = ls.product(ls.spin(0.5), L)
-- S_i . S_j = Sz Sz + (S+ S- + S- S+) / 2
local H0 = ls.sum(1, L - 1, function(i)
  local a, b = P:site(i), P:site(i + 1)
  return a.Sz * b.Sz + 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp)
end)
local V = ls.sum(1, L, function(i) return P:site(i).Sx end)
local t1 = ls.clock()
local sw = ls.sweep{ H0 = H0, V = V, from = 0, to = 1, steps = points - 1, count = count,
                     progress = false }
local last = {}
for k = 1, count do
  local Ek = sw:level(k)
  last[k] = Ek[#Ek]
end
table.sort(last)
local t2 = ls.clock()
io.write(string.format("chain_sweep seconds=%.6f result=%.16g e%d=%.16g build=%.6f\n",
  t2 - t0, last[1], count, last[count], t1 - t0))
